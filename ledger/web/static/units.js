/* Units suggested while a quantity is typed: after "12 " the input's list offers "12 psi",
   "12 bar"... The unit names come from the page's <datalist id="units-KIND"> elements
   (rendered by the server from the logbook's list); without this script the lists still offer
   the bare unit names, and the form works the same. */
(function () {
  "use strict";
  var NUMBER = /^\s*([-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*)$/;
  var units = {};

  function remember(list) {
    var names = [];
    for (var i = 0; i < list.options.length; i++) names.push(list.options[i].value);
    units[list.id] = names;
  }

  function offer(input) {
    var list = input.list;
    if (!list || !units[list.id]) return;
    var m = NUMBER.exec(input.value);
    var names = units[list.id];
    var typed = m ? m[2].toLowerCase() : "";
    var shown = [];
    for (var i = 0; i < names.length; i++) {
      if (!m) { shown.push(names[i]); continue; }
      if (!typed || names[i].toLowerCase().indexOf(typed) === 0) shown.push(m[1] + " " + names[i]);
    }
    var current = [];
    for (var j = 0; j < list.options.length; j++) current.push(list.options[j].value);
    if (current.join("\n") === shown.join("\n")) return;
    while (list.firstChild) list.removeChild(list.firstChild);
    for (var k = 0; k < shown.length; k++) {
      var option = document.createElement("option");
      option.value = shown[k];
      list.appendChild(option);
    }
  }

  function start() {
    var lists = document.querySelectorAll("datalist[id^='units-']");
    for (var i = 0; i < lists.length; i++) remember(lists[i]);
    var inputs = document.querySelectorAll("input[data-kind]");
    for (var j = 0; j < inputs.length; j++) {
      inputs[j].addEventListener("input", function (e) { offer(e.target); });
      inputs[j].addEventListener("focus", function (e) { offer(e.target); });
    }
  }

  if (document.readyState === "loading") document.addEventListener("DOMContentLoaded", start);
  else start();
})();
