"""Text options skip typer's per-option pydantic adapter.

Typer coerces every option value through a pydantic TypeAdapter that it builds, and whose
module it imports, on first use: about 0.3 s of a command's start-up here, spent checking
that a string from the command line is a string. Options declared ``str`` (or ``str |
None``) take the value as click parsed it; every other type (numbers, lists, paths) keeps
typer's own coercion. If typer's internals ever move, :func:`install` changes nothing.
"""

from __future__ import annotations

from typing import Any

_TEXT: tuple[Any, ...] = (str, str | None)


def install() -> None:
    """Route ``str`` options past the adapter (once per process; harmless if repeated)."""
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
            descriptor.annotation in _TEXT
            and descriptor.file_annotation is None
            and getattr(info, "parser", None) is None
        ):
            # accepts a str as it is and refuses anything else, as typer's adapter would
            return passthrough(annotation=str, parameter_info=info)
        return original(descriptor)

    build.text_options = True  # type: ignore[attr-defined]
    core.build_runtime_param = build
