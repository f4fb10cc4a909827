"""Master-record templates: one TOML file of data with Jinja2 text for the instructions.

A template names its inputs (with their physical kinds), its planned parameters (each an
expression of the inputs, of the module's geometry and of other parameters, with a display
unit, an optional acceptance range and the skid-log metric that measures it), its ordered
steps (operation -> phase) with the signatures each needs, and its QC attributes with their
specifications. Everything is checked when the file is loaded, and every mistake in the file
is reported at once, each with its file, line and key: an unknown name, a unit of the wrong
dimension, a bad expression, a misspelt key, parameters that depend on each other in a cycle.
Parameters are computed in the order their expressions need (``Template.order``), whatever
order the file lists them in. The SHA-256 of the file's exact bytes identifies the version a
run used; a parsed template is an immutable value, kept by that hash so a file is read once.
"""

from __future__ import annotations

import dataclasses
import hashlib
import re
import threading
import tomllib
from collections import OrderedDict
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any, TypeVar

from ledger import units
from ledger.errors import InputError
from ledger.rules.signing import MEANINGS
from ledger.runs.actuals import CHANNEL_KINDS
from ledger.runs.expr import Expr, ExpressionError, compile_expr, evaluation_order

# Who may sign each meaning when a template does not say (common practice, no single source):
# an administrator signs nothing (21 CFR 11 / Annex 11 separation of duties).
SIGNER_ROLES = ("operator", "engineer", "qa")
DEFAULT_SIGNERS: dict[str, tuple[str, ...]] = {
    "performed": ("operator", "engineer"),
    "verified": ("operator", "engineer", "qa"),
    "reviewed": ("engineer", "qa"),
    "approved": ("qa",),
}

# The module's facts a template may name, with their kinds (None: a count).
MODULE_NAMES: dict[str, str | None] = {
    "area": "area",
    "fibers": None,
    "lumen_diameter": "length",
    "fiber_length": "length",
    "max_volume_loading": "areal_volume",
    "max_mass_loading": "areal_mass",
}

SCALAR_METRICS: dict[str, str | None] = {
    "duration": "time",
    "permeate_volume": "volume",
    "initial_volume": "volume",
    "final_volume": "volume",
    "diavolumes": None,
    "concentration_factor": None,
    "flux_decline": None,
}
# Skid-log channels a parameter can follow sample by sample, and their kinds: those a summary
# holds, except the cumulative permeate volume, which is checked as the scalar metric.
CHANNELS: dict[str, str] = {k: v for k, v in CHANNEL_KINDS.items() if k not in SCALAR_METRICS}
STATISTICS = ("mean", "min", "max")
# In a range, the parameter's own planned value.
PLAN = "plan"

# When a unit fits several kinds (L/m² is a length), the first kind listed wins.
_KIND_ORDER = (
    "pressure", "flow", "flux", "temperature", "volume", "time", "shear_rate", "area",
    "concentration", "mass", "viscosity", "areal_volume", "areal_mass", "length", "density",
    "permeability", "conductivity", "molarity", "fraction",
)  # fmt: skip
_NAME = re.compile(r"^[a-z][a-z0-9_]*$")
_TOML_LINE = re.compile(r"\(at line (\d+), column (\d+)\)")
_TOP_KEYS = {"template", "inputs", "parameters", "steps", "qc", "optimum"}
_PARAMETER_KEYS = {"title", "expr", "unit", "phase", "actual", "range"}
_CACHE_SIZE = 64  # parsed templates kept; a site has a few dozen versions at most

_V = TypeVar("_V")


@dataclass(frozen=True)
class Input:
    name: str
    kind: str | None  # None: a plain number (a count, a ratio without unit)
    title: str
    default: str | None = None


@dataclass(frozen=True)
class Bound:
    """One end of a range: a quantity typed in the template, or an expression."""

    text: str
    expr: Expr | None  # None: a fixed quantity, ``value`` (SI)
    value: float | None = None


@dataclass(frozen=True)
class AcceptanceRange:
    relative: float | None = None  # ± fraction of the planned value
    low: Bound | None = None
    high: Bound | None = None


@dataclass(frozen=True)
class Parameter:
    name: str
    title: str
    expr: Expr
    unit: str  # display unit
    kind: str | None
    phase: str | None = None
    actual: str | None = None  # the skid-log metric that measures it
    range: AcceptanceRange | None = None


@dataclass(frozen=True)
class EntrySpec:
    """A value entered when a step is performed (``[[steps.entries]]``): a quantity of
    ``kind`` (a kind of ledger.units.KINDS), a plain ``number`` or ``text``, shown in ``unit``,
    with an acceptance range whose bounds are quantities or expressions of the inputs, module
    facts and parameters (evaluated against the run's plan)."""

    name: str
    title: str
    kind: str  # a kind of ledger.units.KINDS, "number" or "text"
    unit: str  # display unit ("" for a number or text)
    phase: str  # the skid-log phase it covers
    low: Bound | None = None
    high: Bound | None = None


ENTRY_KINDS = ("number", "text")  # besides the kinds of ledger.units.KINDS
_ENTRY_KEYS = {"name", "title", "kind", "unit", "low", "high", "phase"}


@dataclass(frozen=True)
class Step:
    operation: str
    phase: str
    title: str
    signatures: tuple[str, ...]
    text: str  # Jinja2
    entries: tuple[EntrySpec, ...] = ()  # what is entered when the step is performed


@dataclass(frozen=True)
class QcAttribute:
    name: str
    title: str
    unit: str
    kind: str | None
    low: float | None  # SI
    high: float | None
    method: str | None = None


@dataclass(frozen=True)
class Optimum:
    """Which plan values feed the gel-model comparison when scouting points are given."""

    concentration: str
    mass: str
    diavolumes: str


@dataclass(frozen=True)
class Template:
    """A validated template. Immutable: one parsed value is shared by every caller."""

    id: str
    version: str
    title: str
    source: str
    sha256: str
    text: str
    inputs: Mapping[str, Input]
    parameters: tuple[Parameter, ...]  # as the file lists them (plans and records show this)
    order: tuple[str, ...]  # the parameters' names in the order they are computed
    steps: tuple[Step, ...]
    qc: tuple[QcAttribute, ...]
    signatures: tuple[str, ...]  # the record's signatures, in order
    product: str | None = None
    optimum: Optimum | None = None
    notes: tuple[str, ...] = ()
    signers: Mapping[str, tuple[str, ...]] = field(  # meaning -> roles
        default_factory=lambda: MappingProxyType({})
    )

    def parameter(self, name: str) -> Parameter:
        return next(p for p in self.parameters if p.name == name)

    def evaluation_order(self) -> tuple[Parameter, ...]:
        """The parameters in the order they are computed: each after the ones it uses."""
        by_name = {p.name: p for p in self.parameters}
        return tuple(by_name[n] for n in self.order)


class TemplateError(InputError):
    """Every mistake found in one template file, in line order; ``problems`` holds each one
    (with its ``source``, ``line`` and ``field``), and the message lists one per line."""

    def __init__(self, source: str, problems: Sequence[InputError]) -> None:
        ordered = sorted(problems, key=lambda p: (p.line is None, p.line or 0))
        first = ordered[0]
        if len(ordered) == 1:
            message = str(first)
        else:
            lines = "\n".join(f"  {p}" for p in ordered)
            message = f"{source}: {len(ordered)} mistakes in the template:\n{lines}"
        super().__init__(message, field=first.field, value=first.value)
        self.problems = tuple(ordered)


def shipped_dir() -> Path:
    """templates/ of a checkout, or ledger/templates when installed."""
    import ledger

    here = Path(ledger.__file__).resolve().parent
    for candidate in (here / "templates", here.parent / "templates"):
        if candidate.is_dir() and any(candidate.glob("*.toml")):
            return candidate
    raise RuntimeError("the master-record templates are not installed with this package")


def shipped() -> list[Template]:
    """Every template shipped with the package, sorted by ID."""
    return sorted((load(p) for p in shipped_dir().glob("*.toml")), key=lambda t: t.id)


@dataclass(frozen=True)
class InputInfo:
    """One input of a template as a planner types it: its kind (``number`` for a plain
    number), the unit it is shown in, and its default (SI; None: the planner must give it)."""

    name: str
    title: str
    kind: str
    unit: str
    default_text: str | None
    default: float | None

    @property
    def required(self) -> bool:
        return self.default_text is None


@dataclass(frozen=True)
class CatalogueEntry:
    """A shipped template: what it is, for which product, and the inputs it asks for."""

    id: str
    version: str
    title: str
    product: str | None
    sha256: str
    file: str
    inputs: tuple[InputInfo, ...]


def input_info(spec: Input) -> InputInfo:
    """What ``run templates`` shows of one input; its default is parsed into SI."""
    kind = spec.kind or "number"
    unit = units.KINDS[kind].display if kind in units.KINDS else ""
    default: float | None = None
    if spec.default is not None:
        where = f"inputs.{spec.name}.default"
        if kind == "number":
            default = units.split_number(spec.default, field=where, expected="a number")[0]
        else:
            default = units.parse(spec.default, kind, field=where)
    return InputInfo(spec.name, spec.title, kind, unit, spec.default, default)


def catalogue() -> list[CatalogueEntry]:
    """Every shipped template with its inputs (required ones first, each group in file
    order), sorted by ID."""
    out = []
    for t in shipped():
        infos = [input_info(i) for i in t.inputs.values()]
        infos.sort(key=lambda i: not i.required)
        file = Path(t.source).name
        out.append(
            CatalogueEntry(t.id, t.version, t.title, t.product, t.sha256, file, tuple(infos))
        )
    return out


def find(ref: str) -> Template:
    """A template by file path, or by the ID of a shipped template."""
    path = Path(ref)
    if path.suffix == ".toml" and path.exists():
        return load(path)
    for t in shipped():
        if t.id == ref:
            return t
    known = ", ".join(t.id for t in shipped())
    raise InputError(
        f"template {ref!r} is neither a file nor a shipped template ID (shipped: {known})",
        field="template",
        value=ref,
        expected=f"a .toml file or one of {known}",
    )


def load(path: str | Path) -> Template:
    """Read and validate a template file."""
    from ledger import tomlfile
    from ledger.userfiles import read_user_file

    raw = read_user_file(path, "template", tomlfile.MAX_BYTES)
    return parse(raw, str(path))


_cache: OrderedDict[str, Template] = OrderedDict()
_cache_lock = threading.Lock()


def parse(raw: bytes, source: str) -> Template:
    """Validate a template from its bytes; ``source`` names it in errors.

    The result is kept by the SHA-256 of ``raw``: the same bytes give the same (immutable)
    value without being read again, under the ``source`` asked for.
    """
    digest = hashlib.sha256(raw).hexdigest()
    with _cache_lock:
        kept = _cache.get(digest)
        if kept is not None:
            _cache.move_to_end(digest)
    if kept is None:
        kept = _parse(raw, source, digest)
        with _cache_lock:
            _cache[digest] = kept
            while len(_cache) > _CACHE_SIZE:
                _cache.popitem(last=False)
    return kept if kept.source == source else dataclasses.replace(kept, source=source)


def _parse(raw: bytes, source: str, digest: str) -> Template:
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(
            f"{source}: not a valid TOML file (not UTF-8 text: {exc.reason})",
            field="template",
            value=source,
            expected="a TOML master-record template",
        ) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        found = _TOML_LINE.search(str(exc))
        raise InputError(
            f"not a valid TOML file ({exc})",
            field="template",
            value=source,
            expected="a TOML master-record template",
            source=source,
            line=int(found.group(1)) if found else None,
        ) from None
    return _Reader(source, data, KeyLines(text)).template(text, digest)


# -- where each key is written -------------------------------------------------------------

_KEY_PART = r"""(?:[A-Za-z0-9_-]+|"(?:[^"\\]|\\.)*"|'[^']*')"""
_DOTTED = rf"{_KEY_PART}(?:\s*\.\s*{_KEY_PART})*"
_ARRAY_HEADER = re.compile(rf"\s*\[\[\s*({_DOTTED})\s*\]\]")
_TABLE_HEADER = re.compile(rf"\s*\[\s*({_DOTTED})\s*\]")
_ASSIGNMENT = re.compile(rf"\s*({_DOTTED})\s*=")
_ONE_PART = re.compile(r"""[A-Za-z0-9_-]+|"((?:[^"\\]|\\.)*)"|'([^']*)'""")


class KeyLines:
    """The line on which each key of a TOML text is written (tomllib gives values only).

    Keys are dotted paths as the template reader names them: ``parameters.feed_flow.expr``,
    ``steps[2].text`` for the second ``[[steps]]``. A key inside an inline table or a value
    gets the line of the nearest key above it that is written out (``range = { ... }``).
    """

    def __init__(self, text: str) -> None:
        self.lines: dict[tuple[str, ...], int] = {}
        table: tuple[str, ...] = ()
        arrays: dict[tuple[str, ...], int] = {}
        scan = _ValueScan()
        for number, line in enumerate(text.splitlines(), start=1):
            rest = line
            if scan.idle():
                if m := _ARRAY_HEADER.match(line):
                    # A nested array ([[steps.entries]]) belongs to its parent's current item.
                    parts = _key_parts(m.group(1))
                    path = (*_indexed(parts[:-1], arrays), parts[-1])
                    arrays[path] = arrays.get(path, 0) + 1
                    table = (*path[:-1], f"{path[-1]}[{arrays[path]}]")
                    self._add(table, number)
                    rest = line[m.end() :]
                elif m := _TABLE_HEADER.match(line):
                    table = _key_parts(m.group(1))
                    self._add(table, number)
                    rest = line[m.end() :]
                elif m := _ASSIGNMENT.match(line):
                    self._add((*table, *_key_parts(m.group(1))), number)
                    rest = line[m.end() :]
            scan.feed(rest)

    def _add(self, path: tuple[str, ...], number: int) -> None:
        for end in range(1, len(path) + 1):
            self.lines.setdefault(path[:end], number)

    def find(self, key: str) -> int | None:
        """The line of ``key``, else of its nearest written parent; None when neither is."""
        parts = tuple(key.split("."))
        for end in range(len(parts), 0, -1):
            if parts[:end] in self.lines:
                return self.lines[parts[:end]]
        return None


def _indexed(parts: tuple[str, ...], arrays: Mapping[tuple[str, ...], int]) -> tuple[str, ...]:
    """``parts`` with each array of tables named by its current item (``steps[2]``)."""
    out: list[str] = []
    for part in parts:
        count = arrays.get((*out, part))
        out.append(part if count is None else f"{part}[{count}]")
    return tuple(out)


def _key_parts(dotted: str) -> tuple[str, ...]:
    return tuple(
        m.group(1) if m.group(1) is not None else m.group(2) or m.group(0)
        for m in _ONE_PART.finditer(dotted)
    )


class _ValueScan:
    """Follows strings, comments and brackets of values, so that a line inside a multi-line
    string or array is never taken for a key or a table header."""

    def __init__(self) -> None:
        self.depth = 0
        self.open_string: str | None = None  # the delimiter of an unclosed multi-line string

    def idle(self) -> bool:
        return self.depth == 0 and self.open_string is None

    def feed(self, text: str) -> None:
        i = 0
        while i < len(text):
            if self.open_string is not None:
                end = text.find(self.open_string, i)
                if end < 0:
                    return
                i, self.open_string = end + 3, None
                continue
            if text.startswith(('"""', "'''"), i):
                delimiter = text[i : i + 3]
                end = text.find(delimiter, i + 3)
                if end < 0:
                    self.open_string = delimiter
                    return
                i = end + 3
            elif text[i] == '"':
                i += 1
                while i < len(text) and text[i] != '"':
                    i += 2 if text[i] == "\\" else 1
                i += 1
            elif text[i] == "'":
                end = text.find("'", i + 1)
                i = len(text) if end < 0 else end + 1
            elif text[i] == "#":
                return
            else:
                if text[i] in "[{":
                    self.depth += 1
                elif text[i] in "]}":
                    self.depth = max(0, self.depth - 1)
                i += 1


# -- the reader ----------------------------------------------------------------------------


@dataclass
class _Draft:
    """A parameter as read in the first pass, before every name of the file is known."""

    name: str
    key: str
    spec: dict[str, Any]
    unit: str | None = None  # None: no usable unit (a mistake already noted)
    kind: str | None = None
    expr: Expr | None = None
    title: str | None = None


def _sure(value: _V | None) -> _V:
    # Each missing piece came with a noted mistake, and noted mistakes are raised first.
    assert value is not None
    return value


def _names(names: Sequence[str]) -> str:
    return ", ".join(repr(n) for n in names)


class _Reader:
    def __init__(self, source: str, data: dict[str, Any], lines: KeyLines) -> None:
        self.source = source
        self.data = data
        self.lines = lines
        self.kinds: dict[str, str | None] = dict(MODULE_NAMES)
        self.vague: set[str] = set()  # names whose kind is unknown after a noted mistake
        self.problems: list[InputError] = []
        self.phases: list[tuple[str, str]] = []  # (key, phase) the parameters name
        self.step_phases: set[str] = set()  # the phases the steps name, even a faulty step

    def fail(self, key: str, message: str, value: object = None, expected: str = "") -> InputError:
        return InputError(
            f"{key}: {message}",
            field=key,
            value=value,
            expected=expected or None,
            source=self.source,
            line=self.lines.find(key),
        )

    def note(self, key: str, message: str, value: object = None, expected: str = "") -> None:
        self.problems.append(self.fail(key, message, value, expected))

    @contextmanager
    def collect(self) -> Iterator[None]:
        """Note the mistake a block raises and carry on with the rest of the file."""
        try:
            yield
        except InputError as exc:
            self.problems.append(exc)

    def table(
        self, key: str, value: Any, allowed: set[str], required: set[str]
    ) -> dict[str, Any] | None:
        if not isinstance(value, dict):
            self.note(key, f"expected a table, got {value!r}")
            return None
        within = "" if key == "(top level)" else f"{key}."
        for k in value:
            if k not in allowed:
                self.note(f"{within}{k}", "unknown key", k, f"one of {', '.join(sorted(allowed))}")
        for k in sorted(required):
            if k not in value:
                self.note(f"{within}{k}", "is missing", None, "a value")
        return value

    def text(self, key: str, value: Any) -> str:
        if not isinstance(value, str) or not value.strip():
            raise self.fail(key, f"expected non-empty text, got {value!r}")
        return value.strip()

    def declare(self, name: str, kind: str | None, *, known: bool) -> None:
        if name not in self.kinds:
            self.kinds[name] = kind
            if not known:
                self.vague.add(name)

    def template(self, text: str, digest: str) -> Template:
        self.table("(top level)", self.data, _TOP_KEYS, {"template", "parameters", "steps"})
        head = self.data.get("template", {})
        if "template" in self.data:
            head = self.table(
                "template",
                head,
                {"id", "version", "title", "product", "signatures", "signers", "notes"},
                {"id", "version", "title", "signatures"},
            )
        head = head or {}
        inputs = self.inputs(self.data.get("inputs", {}))
        parameters, order = self.parameters(self.data.get("parameters"))
        steps = self.steps(self.data["steps"]) if "steps" in self.data else []
        self.check_phases()
        qc = self.qc(self.data.get("qc", {}))
        optimum = None
        with self.collect():
            optimum = self.optimum(self.data.get("optimum"))
        fields: dict[str, str] = {}
        for name in ("id", "version", "title"):
            if name in head:
                value = str(head[name]) if name == "version" else head[name]
                with self.collect():
                    fields[name] = self.text(f"template.{name}", value)
        notes = head.get("notes", [])
        if not isinstance(notes, list) or not all(isinstance(n, str) for n in notes):
            self.note("template.notes", "expected a list of text")
        signatures: tuple[str, ...] | None = None
        signers: dict[str, tuple[str, ...]] | None = None
        if "signatures" in head:
            with self.collect():
                signatures = self.meanings("template.signatures", head["signatures"])
            if signatures is not None:
                signers = self.signers(head.get("signers"), signatures)
        if self.problems:
            raise TemplateError(self.source, self.problems)
        return Template(
            id=fields["id"],
            version=fields["version"],
            title=fields["title"],
            source=self.source,
            sha256=digest,
            text=text,
            inputs=MappingProxyType(inputs),
            parameters=tuple(parameters),
            order=tuple(order),
            steps=tuple(steps),
            qc=tuple(qc),
            signatures=_sure(signatures),
            product=head.get("product"),
            optimum=optimum,
            notes=tuple(notes),
            signers=MappingProxyType(_sure(signers)),
        )

    def signers(self, raw: Any, meanings: tuple[str, ...]) -> dict[str, tuple[str, ...]] | None:
        """The roles that may sign each meaning: [template.signers], else DEFAULT_SIGNERS."""
        if raw is None:
            return {m: DEFAULT_SIGNERS[m] for m in meanings}
        if not isinstance(raw, dict):
            self.note("template.signers", f"expected a table, got {raw!r}")
            return None
        before = len(self.problems)
        out: dict[str, tuple[str, ...]] = {}
        for m in meanings:
            key = f"template.signers.{m}"
            roles = raw.get(m)
            if roles is None:
                self.note(key, f"no roles given for the signature {m!r}", None,
                          "a list of roles, e.g. [\"qa\"]")  # fmt: skip
            elif not isinstance(roles, list) or not roles:
                self.note(key, f"expected a list of roles, got {roles!r}", roles)
            else:
                for r in roles:
                    if r not in SIGNER_ROLES:
                        self.note(key, f"role {r!r} may not sign records", r,
                                  f"one of {', '.join(SIGNER_ROLES)}")  # fmt: skip
                out[m] = tuple(roles)
        for m in raw:
            if m not in meanings:
                self.note(f"template.signers.{m}", f"{m!r} is not one of this template's "
                          "signatures", m, ", ".join(meanings))  # fmt: skip
        return out if len(self.problems) == before else None

    def name(self, key: str, name: str) -> str:
        if not _NAME.match(name):
            raise self.fail(
                key, f"{name!r} is not a plain name", name, "lower-case letters, digits, _"
            )
        if name == PLAN:
            raise self.fail(
                key, f"the name {PLAN!r} is kept for a parameter's own planned value in its range",
                name, "another name",
            )  # fmt: skip
        if name in self.kinds:
            raise self.fail(key, f"the name {name!r} is already used", name, "a new name")
        return name

    def kind_of_unit(self, key: str, unit: str) -> str | None:
        if unit.strip() in ("", "1"):
            return None
        ureg = units.registry()
        dim = self.unit_quantity(key, unit).dimensionality
        for kind in _KIND_ORDER:
            k = units.KINDS[kind]
            probe = ureg.Quantity(1.0, k.si) if k.si else ureg.Quantity(1.0)
            if probe.dimensionality == dim:
                return kind if kind != "fraction" else None
        raise self.fail(key, f"the unit {unit!r} is of no kind fluxledger knows", unit)

    def unit_quantity(self, key: str, unit: str) -> Any:
        """One ``unit`` as a pint quantity (1 of it; a plain 1 for no unit). The text passes
        the units grammar first, so no expression pint would evaluate for ever reaches it."""
        ureg = units.registry()
        if not unit.strip():
            return ureg.Quantity(1.0)
        expected = "a unit pint understands, e.g. psi, L/(m^2*h), degC"
        try:
            clean = units.check_unit_text(unit, field=key, shown=unit, expected=expected)
            return ureg.Quantity(1.0, clean)
        except InputError as exc:
            raise self.fail(key, exc.message.removeprefix(f"{key}: "), unit, expected) from None
        except Exception:  # pint raises many types for malformed unit text
            raise self.fail(key, f"unknown unit {unit!r}", unit, expected) from None

    def inputs(self, raw: Any) -> dict[str, Input]:
        out: dict[str, Input] = {}
        if self.table("inputs", raw, set(raw) if isinstance(raw, dict) else set(), set()) is None:
            return out
        for name, spec in raw.items():
            got = self.input(f"inputs.{name}", name, spec)
            if got is not None:
                out[name] = got
        return out

    def input(self, key: str, name: str, raw: Any) -> Input | None:
        named = False
        with self.collect():
            named = bool(self.name(key, name))
        spec = self.table(key, raw, {"kind", "title", "default"}, {"kind", "title"})
        if spec is None:
            self.declare(name, None, known=False)
            return None
        kind = spec.get("kind")
        known = kind == "number" or kind in units.KINDS
        if "kind" in spec and not known:
            self.note(
                f"{key}.kind", f"unknown kind {kind!r}", kind, "number or a kind of ledger.units"
            )
        default = spec.get("default")
        if default is not None and known:
            with self.collect():
                self.quantity(f"{key}.default", str(default), kind)
        title = None
        if "title" in spec:
            with self.collect():
                title = self.text(f"{key}.title", spec["title"])
        self.declare(name, None if kind in ("number", "fraction") else kind, known=known)
        if not (named and known and title):
            return None
        return Input(name, kind if kind != "number" else None, title, default)

    def quantity(self, key: str, text: str, kind: str | None) -> float:
        try:
            if kind in (None, "number"):
                number, unit = units.split_number(text, field=key, expected="a number")
                if unit:
                    raise self.fail(key, f"{text!r} should be a plain number", text, "a number")
                return number
            return units.parse(text, kind, field=key)
        except InputError as exc:
            if exc.source == self.source:
                raise
            message = exc.message.removeprefix(f"{key}: ")
            raise self.fail(key, message, text, exc.expected or "") from None

    def compiled(self, key: str, text: Any) -> Expr:
        try:
            return compile_expr(text, where=key)
        except ExpressionError as exc:
            raise self.fail(key, exc.message.removeprefix(f"{key}: "), text) from None

    def check_names(self, key: str, expr: Expr, *, own: str | None = None) -> None:
        """Every name ``expr`` reads is known; ``own`` names the parameter whose range it is."""
        known = set(self.kinds) | ({PLAN} if own else set())
        unknown = sorted(expr.names - known)
        if unknown:
            what = "an input, a module fact or a parameter" + (f", or {PLAN}" if own else "")
            raise self.fail(
                key,
                f"unknown name{'s' if len(unknown) > 1 else ''} {_names(unknown)} in {expr.text!r}",
                unknown[0],
                f"{what}: {', '.join(sorted(known))}",
            )
        if own is not None and own in expr.names:
            raise self.fail(
                key, f"{own!r} is this parameter itself in {expr.text!r}", own,
                f"{PLAN} for the parameter's own planned value",
            )  # fmt: skip

    def dimension_of(self, key: str, expr: Expr) -> Any:
        """The pint quantity ``expr`` gives on unit quantities; None when a name's kind is
        unknown (its mistake is noted where that name is defined)."""
        import pint

        if expr.names & self.vague:
            return None
        ureg = units.registry()
        env = {}
        for n in expr.names:
            kind = self.kinds[n]
            si = units.KINDS[kind].si if kind else ""
            env[n] = ureg.Quantity(1.0, si) if si else ureg.Quantity(1.0)
        try:
            result = expr.dimension(env)
        except pint.DimensionalityError as exc:
            raise self.fail(key, f"unit mismatch in {expr.text!r}: {exc}", expr.text) from None
        except (ZeroDivisionError, OverflowError, ValueError) as exc:
            raise self.fail(key, f"{expr.text!r} cannot be evaluated: {exc}", expr.text) from None
        return result if isinstance(result, pint.Quantity) else ureg.Quantity(result)

    def same_dimension(self, key: str, expr: Expr, unit: str) -> None:
        got = self.dimension_of(key, expr)
        if got is None:
            return
        want = self.unit_quantity(key, unit)
        if got.dimensionality != want.dimensionality:
            raise self.fail(
                key,
                f"{expr.text!r} gives {got.dimensionality or 'a plain number'}, "
                f"but the unit {unit!r} is {want.dimensionality or 'dimensionless'}",
                expr.text,
                f"an expression in {unit or 'a plain number'}",
            )

    def parameters(self, raw: Any) -> tuple[list[Parameter], list[str]]:
        """Two passes: every parameter's name and kind first, so that an expression may use a
        parameter written after it; then the names, dimensions, ranges and the order."""
        if raw is None:
            return [], []  # noted as missing at the top level
        if not isinstance(raw, dict) or not raw:
            self.note("parameters", "expected at least one planned parameter")
            return [], []
        drafts = [d for name, spec in raw.items() if (d := self.draft(name, spec)) is not None]
        out: list[Parameter] = []
        uses: dict[str, set[str]] = {}
        for d in drafts:
            got, used = self.finish(d)
            uses[d.name] = used
            if got is not None:
                out.append(got)
        order, cycles = evaluation_order(uses)
        for group in cycles:
            self.problems.append(self.cycle(group, uses))
        return out, order

    def draft(self, name: str, raw: Any) -> _Draft | None:
        key = f"parameters.{name}"
        with self.collect():
            self.name(key, name)
        spec = self.table(key, raw, _PARAMETER_KEYS, {"title", "expr", "unit"})
        if spec is None:
            self.declare(name, None, known=False)
            return None
        d = _Draft(name, key, spec)
        unit = spec.get("unit")
        if "unit" in spec and not isinstance(unit, str):
            self.note(f"{key}.unit", f"expected a unit as text, got {unit!r}", unit)
        elif isinstance(unit, str):
            with self.collect():
                d.kind = self.kind_of_unit(f"{key}.unit", unit)
                d.unit = unit
        self.declare(name, d.kind, known=d.unit is not None)
        if "expr" in spec:
            with self.collect():
                d.expr = self.compiled(f"{key}.expr", spec["expr"])
        if "title" in spec:
            with self.collect():
                d.title = self.text(f"{key}.title", spec["title"])
        actual = spec.get("actual")
        if actual is not None:
            with self.collect():
                self.metric(f"{key}.actual", actual, d.unit)
            if "range" not in spec:
                self.note(f"{key}.range", "a parameter measured on the skid log needs a range",
                          None, "relative, low or high")  # fmt: skip
        if spec.get("phase") is not None:
            self.phases.append((f"{key}.phase", spec["phase"]))
        return d

    def finish(self, d: _Draft) -> tuple[Parameter | None, set[str]]:
        """The parameter, and the names its expression and its range read."""
        used: set[str] = set()
        before = len(self.problems)
        if d.expr is not None:
            used |= d.expr.names
            with self.collect():
                self.check_names(f"{d.key}.expr", d.expr)
                if d.unit is not None:
                    self.same_dimension(f"{d.key}.expr", d.expr, d.unit)
        rng = None
        if "range" in d.spec:
            rng, bound_names = self.range(f"{d.key}.range", d.spec["range"], d)
            used |= bound_names - {PLAN}
        if len(self.problems) > before or d.expr is None or d.unit is None or d.title is None:
            return None, used
        return (
            Parameter(
                name=d.name,
                title=d.title,
                expr=d.expr,
                unit=d.unit,
                kind=d.kind,
                phase=d.spec.get("phase"),
                actual=d.spec.get("actual"),
                range=rng,
            ),
            used,
        )

    def cycle(self, group: list[str], uses: Mapping[str, set[str]]) -> InputError:
        first = group[0]
        if len(group) == 1:
            why = f"{first} uses itself, so it can never be computed"
        else:
            where = ", ".join(
                f"{n} (line {line})" if (line := self.lines.find(f"parameters.{n}.expr")) else n
                for n in group
            )
            edges = "; ".join(
                f"{n} uses {', '.join(u for u in group if u in uses[n])}" for n in group
            )
            why = (
                f"the parameters {where} depend on each other in a cycle ({edges}), "
                "so none of them can be computed"
            )
        return self.fail(
            f"parameters.{first}.expr", why, group,
            "expressions that do not come back to themselves through other parameters",
        )  # fmt: skip

    def metric(self, key: str, metric: Any, unit: str | None) -> None:
        if not isinstance(metric, str):
            raise self.fail(key, f"expected a metric name, got {metric!r}")
        channel, _, stat = metric.partition(".")
        known = [*SCALAR_METRICS, *CHANNELS, *(f"{c}.{s}" for c in CHANNELS for s in STATISTICS)]
        if metric in SCALAR_METRICS:
            kind = SCALAR_METRICS[metric]
        elif channel in CHANNELS and (not stat or stat in STATISTICS):
            kind = CHANNELS[channel]
        else:
            raise self.fail(key, f"unknown metric {metric!r}", metric, "one of " + ", ".join(known))
        if unit is None:
            return  # the unit's own mistake is noted
        ureg = units.registry()
        si = units.KINDS[kind].si if kind else ""
        want = ureg.Quantity(1.0, si) if si else ureg.Quantity(1.0)
        have = self.unit_quantity(key, unit)
        if want.dimensionality != have.dimensionality:
            raise self.fail(
                key,
                f"the metric {metric!r} is a {kind or 'plain number'}, but the unit is {unit!r}",
                metric,
            )

    def range(self, key: str, raw: Any, d: _Draft) -> tuple[AcceptanceRange | None, set[str]]:
        """The range and the names its bounds read; None with each mistake noted."""
        spec = self.table(key, raw, {"relative", "low", "high"}, set())
        if spec is None:
            return None, set()
        if "relative" in spec:
            if set(spec) != {"relative"}:
                self.note(key, "give either relative or low/high, not both")
                return None, set()
            try:
                rel = self.quantity(f"{key}.relative", str(spec["relative"]), "fraction")
            except InputError as exc:
                self.problems.append(exc)
                return None, set()
            if not 0 < rel < 1:
                self.note(f"{key}.relative", f"{spec['relative']!r} is out of range",
                          spec["relative"], "a fraction between 0 and 100 %")  # fmt: skip
                return None, set()
            return AcceptanceRange(relative=rel), set()
        if not spec:
            self.note(key, "an empty range", None, "relative, low or high")
            return None, set()
        ends: dict[str, Bound] = {}
        names: set[str] = set()
        for end in ("low", "high"):
            if end not in spec:
                continue
            try:
                ends[end] = self.bound(f"{key}.{end}", spec[end], d)
            except InputError as exc:
                self.problems.append(exc)
                continue
            expr = ends[end].expr
            names |= expr.names if expr is not None else set()
        if set(ends) != {"low", "high"} & set(spec):
            return None, names
        return AcceptanceRange(low=ends.get("low"), high=ends.get("high")), names

    def bound(self, key: str, raw: Any, d: _Draft) -> Bound:
        """A quantity or an expression, decided by parsing: text that reads a known name
        (``plan``, an input, a module fact, a parameter) or calls a function is an
        expression; any other text must be a quantity of the parameter's kind."""
        unit = d.unit or ""
        shown = unit or "a plain number"
        expected = f"a quantity in {shown}, or an expression of {PLAN}, inputs, module facts " \
                   "and parameters"  # fmt: skip
        if isinstance(raw, bool) or not isinstance(raw, int | float | str):
            raise self.fail(
                key, f"expected a quantity or an expression, got {raw!r}", raw, expected
            )
        if isinstance(raw, int | float):
            if d.kind is not None and d.unit is not None:
                raise self.fail(key, f"{raw!r} has no unit", raw, f"a quantity in {unit}")
            return Bound(str(raw), None, float(raw))
        expr: Expr | None = None
        try:
            expr = compile_expr(raw, where=key)
            not_expression = ""
        except ExpressionError as exc:
            why = exc.message.removeprefix(f"{key}: {raw!r}")
            syntax = re.fullmatch(r" is not a valid expression \((.*)\)", why)
            not_expression = syntax.group(1) if syntax else why.removeprefix(": ")
        if expr is not None and (expr.names & (set(self.kinds) | {PLAN}) or expr.functions):
            self.check_names(key, expr, own=d.name)
            if d.unit is not None:
                self.kinds[PLAN] = d.kind
                try:
                    self.same_dimension(key, expr, d.unit)
                finally:
                    del self.kinds[PLAN]
            return Bound(raw, expr)
        if d.unit is None:
            return Bound(raw, None)  # no kind to read a quantity in: the unit's mistake is noted
        try:
            return Bound(raw, None, self.quantity(key, raw, d.kind or "number"))
        except InputError as exc:
            not_quantity = exc.message.removeprefix(f"{key}: ").split("; expected")[0]
        if expr is not None and expr.names:
            unknown = sorted(expr.names)
            not_expression = f"unknown name{'s' if len(unknown) > 1 else ''} {_names(unknown)}"
        elif expr is not None:
            not_expression = f"it names no input, module fact, parameter or {PLAN}"
        raise self.fail(
            key,
            f"{raw!r} is neither a quantity in {shown} ({not_quantity}) "
            f"nor an expression ({not_expression})",
            raw,
            expected,
        )

    def steps(self, raw: Any) -> list[Step]:
        if not isinstance(raw, list) or not raw:
            self.note("steps", "expected a list of steps ([[steps]])")
            return []
        out: list[Step] = []
        seen: set[str] = set()
        for i, spec in enumerate(raw, start=1):
            key = f"steps[{i}]"
            required = {"operation", "phase", "title", "signatures", "text"}
            if self.table(key, spec, required | {"entries"}, required) is None:
                continue
            before = len(self.problems)
            got: dict[str, Any] = {}
            for name in ("operation", "phase", "title", "text"):
                if name in spec:
                    with self.collect():
                        got[name] = self.text(f"{key}.{name}", spec[name])
            if "text" in got:
                with self.collect():
                    self.check_step_text(f"{key}.text", got["text"])
            if "signatures" in spec:
                with self.collect():
                    got["signatures"] = self.meanings(f"{key}.signatures", spec["signatures"])
            phase = got.get("phase")
            if phase is not None and phase in seen:
                self.note(f"{key}.phase", f"the phase {phase!r} appears twice", phase)
            if phase is not None:
                seen.add(phase)
                self.step_phases.add(phase)
            entries = self.entries(key, spec.get("entries", []), phase)
            if len(self.problems) == before:
                out.append(Step(**got, entries=entries))
        return out

    def entries(self, key: str, raw: Any, phase: str | None) -> tuple[EntrySpec, ...]:
        """A step's ``[[steps.entries]]``; each mistake noted with its line."""
        if not isinstance(raw, list):
            self.note(f"{key}.entries", "expected a list of entries ([[steps.entries]])", raw)
            return ()
        out: list[EntrySpec] = []
        seen: set[str] = set()
        for j, spec in enumerate(raw, start=1):
            where = f"{key}.entries[{j}]"
            before = len(self.problems)
            if self.table(where, spec, _ENTRY_KEYS, {"name", "title", "kind"}) is None:
                continue
            name = spec.get("name")
            if "name" in spec:
                if not isinstance(name, str) or not _NAME.match(name):
                    self.note(f"{where}.name", f"{name!r} is not a plain name", name,
                              "lower-case letters, digits, _")  # fmt: skip
                elif name in seen:
                    self.note(f"{where}.name", f"the entry {name!r} appears twice in the step",
                              name, "a new name")  # fmt: skip
                else:
                    seen.add(name)
            title = None
            if "title" in spec:
                with self.collect():
                    title = self.text(f"{where}.title", spec["title"])
            kind = spec.get("kind")
            if "kind" in spec and not (kind in ENTRY_KINDS or kind in units.KINDS):
                self.note(f"{where}.kind", f"unknown kind {kind!r}", kind,
                          "number, text or a kind of ledger.units")  # fmt: skip
                continue
            unit = self.entry_unit(where, kind, spec.get("unit"))
            if spec.get("phase") is not None:
                self.phases.append((f"{where}.phase", spec["phase"]))
            ends: dict[str, Bound] = {}
            if kind == "text" and ("low" in spec or "high" in spec):
                self.note(f"{where}.{'low' if 'low' in spec else 'high'}",
                          "a text entry has no range", None, "no low or high")  # fmt: skip
            elif unit is not None and kind is not None:
                # The bounds are read as a parameter's are; ``plan`` is unknown here.
                draft = _Draft("", where, spec, unit, None if kind == "number" else kind)
                for end in ("low", "high"):
                    if end in spec:
                        with self.collect():
                            ends[end] = self.bound(f"{where}.{end}", spec[end], draft)
            if len(self.problems) > before or unit is None or title is None:
                continue
            out.append(EntrySpec(str(name), title, str(kind), unit,
                                 str(spec.get("phase") or phase), ends.get("low"),
                                 ends.get("high")))  # fmt: skip
        return tuple(out)

    def entry_unit(self, key: str, kind: Any, unit: Any) -> str | None:
        """The entry's display unit (its kind's by default); None with the mistake noted."""
        if kind in ENTRY_KINDS or kind is None:
            if unit not in (None, ""):
                self.note(f"{key}.unit", f"a {kind or 'plain'} entry has no unit", unit, "no unit")
                return None
            return ""
        if unit is None:
            return str(units.KINDS[kind].display)
        if not isinstance(unit, str):
            self.note(f"{key}.unit", f"expected a unit as text, got {unit!r}", unit)
            return None
        try:
            units.linear(unit, kind, field=f"{key}.unit", shown=unit)
        except InputError as exc:
            self.note(f"{key}.unit", exc.message.removeprefix(f"{key}.unit: "), unit,
                      exc.expected or "")  # fmt: skip
            return None
        return unit

    def check_phases(self) -> None:
        phases = self.step_phases
        for key, phase in self.phases:
            if phase not in phases:
                self.note(key, f"unknown phase {phase!r}", phase,
                          f"one of the steps' phases: {', '.join(sorted(phases))}")  # fmt: skip

    def meanings(self, key: str, raw: Any) -> tuple[str, ...]:
        if not isinstance(raw, list) or not raw:
            raise self.fail(key, f"expected a list of signature meanings, got {raw!r}")
        for m in raw:
            if m not in MEANINGS:
                raise self.fail(
                    key, f"unknown signature meaning {m!r}", m, f"one of {', '.join(MEANINGS)}"
                )
        if len(set(raw)) != len(raw):
            raise self.fail(key, "a meaning is listed twice", raw)
        order = [MEANINGS.index(m) for m in raw]
        if order != sorted(order):
            raise self.fail(key, f"meanings out of order {raw}", raw, " -> ".join(MEANINGS))
        return tuple(raw)

    def check_step_text(self, key: str, text: str) -> None:
        """The step text is Jinja2 that names only inputs, parameters, module facts, module
        and run (every name of the file is known by the time steps are read)."""
        from jinja2 import TemplateSyntaxError, meta
        from jinja2.sandbox import SandboxedEnvironment

        try:
            tree = SandboxedEnvironment().parse(text)
        except TemplateSyntaxError as exc:
            raise self.fail(
                key, f"Jinja2 syntax error on line {exc.lineno}: {exc.message}"
            ) from None
        unknown = sorted(meta.find_undeclared_variables(tree) - {*self.kinds, "module", "run"})
        if unknown:
            raise self.fail(
                key,
                f"unknown name{'s' if len(unknown) > 1 else ''} {_names(unknown)} in the step text",
                unknown[0],
                "an input or a parameter",
            )

    def qc(self, raw: Any) -> list[QcAttribute]:
        out: list[QcAttribute] = []
        if self.table("qc", raw, set(raw) if isinstance(raw, dict) else set(), set()) is None:
            return out
        for name, spec in raw.items():
            key = f"qc.{name}"
            before = len(self.problems)
            if self.table(key, spec, {"title", "unit", "low", "high", "method"},
                          {"title", "unit"}) is None:  # fmt: skip
                continue
            unit = spec.get("unit", "")
            kind: str | None = None
            if not isinstance(unit, str):
                self.note(f"{key}.unit", f"expected a unit as text, got {unit!r}", unit)
                continue
            with self.collect():
                kind = self.kind_of_unit(f"{key}.unit", unit)
            if len(self.problems) > before:
                continue
            if "low" not in spec and "high" not in spec:
                self.note(key, "a QC attribute needs a specification (low, high or both)")
            spec_kind = kind or ("fraction" if unit.strip() == "percent" else "number")
            ends: dict[str, float] = {}
            for end in ("low", "high"):
                if end in spec:
                    with self.collect():
                        ends[end] = self.quantity(f"{key}.{end}", str(spec[end]), spec_kind)
            low, high = ends.get("low"), ends.get("high")
            if low is not None and high is not None and low > high:
                self.note(key, "low is above high", (spec["low"], spec["high"]))
            title = None
            if "title" in spec:
                with self.collect():
                    title = self.text(f"{key}.title", spec["title"])
            if len(self.problems) == before and title is not None:
                out.append(QcAttribute(name, title, unit, kind, low, high, spec.get("method")))
        return out

    def optimum(self, raw: Any) -> Optimum | None:
        if raw is None:
            return None
        keys = {"concentration", "mass", "diavolumes"}
        before = len(self.problems)
        spec = self.table("optimum", raw, keys, keys)
        if spec is None:
            return None
        want = {"concentration": "concentration", "mass": "mass", "diavolumes": None}
        for k, kind in want.items():
            name = spec.get(k)
            if k not in spec or name in self.vague:
                continue
            if name not in self.kinds:
                self.note(f"optimum.{k}", f"unknown name {name!r}", name, "an input or a parameter")
            elif self.kinds[name] != kind:
                self.note(f"optimum.{k}", f"{name!r} is a {self.kinds[name] or 'plain number'}",
                          name, f"a {kind or 'plain number'}")  # fmt: skip
        if len(self.problems) > before:
            return None
        return Optimum(spec["concentration"], spec["mass"], spec["diavolumes"])
