"""Channel ranges for `fluxledger log summarize --limits FILE` (TOML), one [[range]] each:

    [[range]]
    channel = "tmp"      # a channel of ledger.runs.actuals.KINDS
    low = "0.2 bar"      # optional; at least one of low and high
    high = "1.2 bar"
    phase = "diafilter"  # optional: only the samples of this phase
    name = "TMP"         # optional label, default the channel

Limits become SI (ledger.units). Every mistake is an InputError naming the file and the key
(and the line, when the TOML itself is malformed).
"""

from __future__ import annotations

from pathlib import Path

from ledger import units
from ledger.errors import InputError
from ledger.runs.actuals import CHANNEL_KINDS, ChannelLimit
from ledger.runs.mapping import read_text
from ledger.tomlfile import parse_toml

KEYS = ("channel", "low", "high", "phase", "name")


def load_limits(path: str | Path) -> list[ChannelLimit]:
    """Read the limits file at ``path`` into ranges (SI)."""
    return parse_limits(read_text(path, "limits", "a readable TOML file"), str(path))


def _fail(
    source: str, key: str, message: str, value: object = None, expected: str = ""
) -> InputError:
    return InputError(
        f"{key}: {message}", field=key, value=value, expected=expected or None, source=source
    )


def parse_limits(text: str, source: str) -> list[ChannelLimit]:
    """Validate a limits file's TOML text; ``source`` is named in every error."""
    data = parse_toml(text, source, "limits", "[[range]] tables")
    for key in data:
        if key != "range":
            raise _fail(source, key, "unknown table", key, "[[range]] tables")
    raw = data.get("range")
    if not isinstance(raw, list) or not raw:
        raise _fail(source, "range", "no [[range]] tables", raw, "one or more [[range]] tables")
    return [_range(source, f"range[{i}]", spec) for i, spec in enumerate(raw, start=1)]


def _range(source: str, key: str, spec: object) -> ChannelLimit:
    if not isinstance(spec, dict):
        raise _fail(source, key, "expected a [[range]] table", spec)
    for k in spec:
        if k not in KEYS:
            raise _fail(source, f"{key}.{k}", "unknown key", k, ", ".join(KEYS))
    channel = spec.get("channel")
    if channel not in CHANNEL_KINDS:
        raise _fail(
            source,
            f"{key}.channel",
            f"unknown channel {channel!r}",
            channel,
            "one of " + ", ".join(CHANNEL_KINDS),
        )
    assert isinstance(channel, str)
    if "low" not in spec and "high" not in spec:
        raise _fail(
            source,
            f"{key}.low",
            "a range needs low, high or both",
            None,
            f'e.g. low = "{units.KINDS[CHANNEL_KINDS[channel]].example.split(",")[0]}"',
        )
    bounds: dict[str, float] = {}
    for end in ("low", "high"):
        if end in spec:
            bounds[end] = _limit(source, f"{key}.{end}", spec[end], CHANNEL_KINDS[channel])
    if "low" in bounds and "high" in bounds and bounds["low"] > bounds["high"]:
        raise _fail(
            source,
            f"{key}.low",
            f"low {spec['low']!r} is above high {spec['high']!r}",
            spec["low"],
            "low <= high",
        )
    texts = {}
    for k in ("phase", "name"):
        value = spec.get(k)
        if value is not None and (not isinstance(value, str) or not value.strip()):
            raise _fail(source, f"{key}.{k}", f"expected text, got {value!r}", value)
        texts[k] = value
    return ChannelLimit(
        texts["name"] or channel, channel, bounds.get("low"), bounds.get("high"), texts["phase"]
    )


def _limit(source: str, key: str, value: object, kind: str) -> float:
    example = units.KINDS[kind].example.split(",")[0]
    if not isinstance(value, str):
        raise _fail(
            source,
            key,
            f"{value!r} has no unit",
            value,
            f'a quoted {kind.replace("_", " ")} with its unit, e.g. "{example}"',
        )
    try:
        return units.parse(value, kind, field=key)
    except InputError as exc:
        raise _fail(
            source, key, exc.message.removeprefix(f"{key}: "), value, exc.expected or ""
        ) from None
