"""Text options and flags skip typer's per-option pydantic adapter.

Typer coerces every option value through a pydantic TypeAdapter that it builds, and whose
module it imports, on first use: about 0.3 s of a command's start-up here, spent checking
that a string from the command line is a string. Options declared ``str`` (or ``str |
None``) and flags declared ``bool`` take the value as click parsed it; every other type
(numbers, lists, paths) keeps typer's own coercion. If typer's internals ever move,
:func:`install` changes nothing.
"""

from __future__ import annotations

from typing import Any

_PLAIN: dict[Any, type] = {str: str, str | None: str, bool: bool}


def install() -> None:
    """Route ``str`` options and ``bool`` flags past the adapter (harmless if repeated)."""
    try:
        from typer import _coercion, core
    except ImportError:  # pragma: no cover - typer reorganized: keep its own behaviour
        return
    original = getattr(core, "build_runtime_param", None)
    passthrough = getattr(_coercion, "PassThroughRuntimeParam", None)
    if original is None or passthrough is None or getattr(original, "text_options", False):
        return

    def build(descriptor: Any) -> Any:
        info = descriptor.parameter_info
        if (
            descriptor.annotation in _PLAIN
            and descriptor.file_annotation is None
            and getattr(info, "parser", None) is None
        ):
            # takes a str (a flag: a bool) as click parsed it and refuses anything else
            return passthrough(annotation=_PLAIN[descriptor.annotation], parameter_info=info)
        return original(descriptor)

    build.text_options = True  # type: ignore[attr-defined]
    core.build_runtime_param = build
