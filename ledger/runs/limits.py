"""Channel ranges for `log summarize --limits FILE` (TOML): one [[range]] table each.

[[range]]
channel = "tmp"      # a derived channel (see ledger.runs.actuals.KINDS)
low = "0.2 bar"      # optional; at least one of low and high
high = "1.2 bar"
phase = "diafilter"  # optional: only the samples of this phase
name = "TMP"         # optional label, default the channel
"""

from __future__ import annotations

import tomllib
from pathlib import Path

from ledger import units
from ledger.errors import InputError
from ledger.runs.actuals import KINDS, Range


def load_limits(path: str | Path) -> list[Range]:
    path = Path(path)
    source = str(path)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise InputError(
            f"{source}: cannot read the limits file ({exc})",
            field="limits",
            value=source,
            expected="a TOML file of [[range]] tables",
        ) from None
    raw = data.get("range")
    if set(data) - {"range"} or not isinstance(raw, list) or not raw:
        raise InputError(
            f"{source}: expected one or more [[range]] tables",
            field="limits",
            value=sorted(data),
            expected="[[range]] tables",
        )
    out = []
    for i, spec in enumerate(raw, start=1):
        key = f"range[{i}]"

        def fail(
            k: str, message: str, value: object = None, expected: str = "", key: str = key
        ) -> InputError:
            return InputError(f"{source}: {key}.{k}: {message}", field=f"{key}.{k}", value=value,
                              expected=expected or None)  # fmt: skip

        unknown = set(spec) - {"channel", "low", "high", "phase", "name"}
        if unknown:
            raise fail(sorted(unknown)[0], "unknown key", None, "channel, low, high, phase, name")
        channel = spec.get("channel")
        if channel not in KINDS:
            raise fail("channel", f"unknown channel {channel!r}", channel, ", ".join(KINDS))
        if "low" not in spec and "high" not in spec:
            raise fail("low", "a range needs low, high or both")
        bounds = {}
        for end in ("low", "high"):
            if end in spec:
                try:
                    bounds[end] = units.parse(str(spec[end]), KINDS[channel], field=f"{key}.{end}")
                except InputError as exc:
                    raise fail(end, exc.message.removeprefix(f"{key}.{end}: "), spec[end]) from None
        if "low" in bounds and "high" in bounds and bounds["low"] > bounds["high"]:
            raise fail("low", "low is above high", (spec["low"], spec["high"]))
        out.append(Range(str(spec.get("name", channel)), channel, bounds.get("low"),
                         bounds.get("high"), spec.get("phase")))  # fmt: skip
    return out
