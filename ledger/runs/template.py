"""Master-record templates: one TOML file of data with Jinja2 text for the instructions.

A template names its inputs (with their physical kinds), its planned parameters (each an
expression of the inputs, of the module's geometry and of earlier parameters, with a display
unit, an optional acceptance range and the skid-log metric that measures it), its ordered
steps (operation -> phase) with the signatures each needs, and its QC attributes with their
specifications. Everything is checked when the file is loaded: an unknown name, a unit of the
wrong dimension, a bad expression or a misspelt key is an error naming the file and the key.
The SHA-256 of the file's exact bytes identifies the version a run used.
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ledger import units
from ledger.errors import InputError
from ledger.rules.signing import MEANINGS
from ledger.runs.actuals import CHANNEL_KINDS
from ledger.runs.expr import Expr, ExpressionError, compile_expr

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

# When a unit fits several kinds (L/m² is a length), the first kind listed wins.
_KIND_ORDER = (
    "pressure", "flow", "flux", "temperature", "volume", "time", "shear_rate", "area",
    "concentration", "mass", "viscosity", "areal_volume", "areal_mass", "length", "density",
    "permeability", "conductivity", "molarity", "fraction",
)  # fmt: skip
_QUANTITY = re.compile(r"^\s*[-+]?(\d+(\.\d*)?|\.\d+)([eE][-+]?\d+)?\s*\S")
_NAME = re.compile(r"^[a-z][a-z0-9_]*$")


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
class Step:
    operation: str
    phase: str
    title: str
    signatures: tuple[str, ...]
    text: str  # Jinja2


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
    id: str
    version: str
    title: str
    source: str
    sha256: str
    text: str
    inputs: dict[str, Input]
    parameters: list[Parameter]
    steps: list[Step]
    qc: list[QcAttribute]
    signatures: tuple[str, ...]  # the record's signatures, in order
    product: str | None = None
    optimum: Optimum | None = None
    notes: list[str] = field(default_factory=list)
    signers: dict[str, tuple[str, ...]] = field(default_factory=dict)  # meaning -> roles

    def parameter(self, name: str) -> Parameter:
        return next(p for p in self.parameters if p.name == name)


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
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise InputError(
            f"cannot read template {path}: {exc.strerror}",
            field="template",
            value=str(path),
            expected="a readable template file",
        ) from None
    return parse(raw, str(path))


def parse(raw: bytes, source: str) -> Template:
    """Validate a template from its bytes; ``source`` names it in errors."""
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        raise InputError(
            f"{source}: not a valid TOML file ({exc})",
            field="template",
            value=source,
            expected="a TOML master-record template",
            source=source,
        ) from None
    return _Reader(source, data).template(raw)


class _Reader:
    def __init__(self, source: str, data: dict[str, Any]) -> None:
        self.source = source
        self.data = data
        self.kinds: dict[str, str | None] = dict(MODULE_NAMES)

    def fail(self, key: str, message: str, value: object = None, expected: str = "") -> InputError:
        return InputError(
            f"{self.source}: {key}: {message}",
            field=key,
            value=value,
            expected=expected or None,
            source=None,
        )

    def table(self, key: str, value: Any, allowed: set[str], required: set[str]) -> dict[str, Any]:
        if not isinstance(value, dict):
            raise self.fail(key, f"expected a table, got {value!r}")
        for k in value:
            if k not in allowed:
                raise self.fail(
                    f"{key}.{k}", "unknown key", k, f"one of {', '.join(sorted(allowed))}"
                )
        for k in sorted(required):
            if k not in value:
                raise self.fail(f"{key}.{k}", "is missing", None, "a value")
        return value

    def text(self, key: str, value: Any) -> str:
        if not isinstance(value, str) or not value.strip():
            raise self.fail(key, f"expected non-empty text, got {value!r}")
        return value.strip()

    def template(self, raw: bytes) -> Template:
        self.table(
            "(top level)",
            self.data,
            {"template", "inputs", "parameters", "steps", "qc", "optimum"},
            {"template", "parameters", "steps"},
        )
        head = self.table(
            "template",
            self.data["template"],
            {"id", "version", "title", "product", "signatures", "signers", "notes"},
            {"id", "version", "title", "signatures"},
        )
        inputs = self.inputs(self.data.get("inputs", {}))
        parameters = self.parameters(self.data["parameters"])
        steps = self.steps(self.data["steps"])
        phases = {s.phase for s in steps}
        for p in parameters:
            if p.phase is not None and p.phase not in phases:
                raise self.fail(
                    f"parameters.{p.name}.phase",
                    f"unknown phase {p.phase!r}",
                    p.phase,
                    f"one of the steps' phases: {', '.join(sorted(phases))}",
                )
        self.check_step_texts(steps, inputs, parameters)
        notes = head.get("notes", [])
        if not isinstance(notes, list) or not all(isinstance(n, str) for n in notes):
            raise self.fail("template.notes", "expected a list of text")
        signatures = self.meanings("template.signatures", head["signatures"])
        return Template(
            id=self.text("template.id", head["id"]),
            version=self.text("template.version", str(head["version"])),
            title=self.text("template.title", head["title"]),
            source=self.source,
            sha256=hashlib.sha256(raw).hexdigest(),
            text=raw.decode("utf-8"),
            inputs=inputs,
            parameters=parameters,
            steps=steps,
            qc=self.qc(self.data.get("qc", {})),
            signatures=signatures,
            product=head.get("product"),
            optimum=self.optimum(self.data.get("optimum")),
            notes=list(notes),
            signers=self.signers(head.get("signers"), signatures),
        )

    def signers(self, raw: Any, meanings: tuple[str, ...]) -> dict[str, tuple[str, ...]]:
        """The roles that may sign each meaning: [template.signers], else DEFAULT_SIGNERS."""
        if raw is None:
            return {m: DEFAULT_SIGNERS[m] for m in meanings}
        if not isinstance(raw, dict):
            raise self.fail("template.signers", f"expected a table, got {raw!r}")
        out: dict[str, tuple[str, ...]] = {}
        for m in meanings:
            key = f"template.signers.{m}"
            roles = raw.get(m)
            if roles is None:
                raise self.fail(key, f"no roles given for the signature {m!r}", None,
                                "a list of roles, e.g. [\"qa\"]")  # fmt: skip
            if not isinstance(roles, list) or not roles:
                raise self.fail(key, f"expected a list of roles, got {roles!r}", roles)
            for r in roles:
                if r not in SIGNER_ROLES:
                    raise self.fail(key, f"role {r!r} may not sign records", r,
                                    f"one of {', '.join(SIGNER_ROLES)}")  # fmt: skip
            out[m] = tuple(roles)
        for m in raw:
            if m not in meanings:
                raise self.fail(f"template.signers.{m}", f"{m!r} is not one of this template's "
                                "signatures", m, ", ".join(meanings))  # fmt: skip
        return out

    def name(self, key: str, name: str) -> str:
        if not _NAME.match(name):
            raise self.fail(
                key, f"{name!r} is not a plain name", name, "lower-case letters, digits, _"
            )
        if name in self.kinds:
            raise self.fail(key, f"the name {name!r} is already used", name, "a new name")
        return name

    def kind_of_unit(self, key: str, unit: str) -> str | None:
        if unit.strip() in ("", "1"):
            return None
        ureg = units.registry()
        try:
            dim = ureg.Quantity(1.0, units._clean_unit(unit)).dimensionality
        except Exception:  # pint raises many types for malformed unit text
            raise self.fail(
                key, f"unknown unit {unit!r}", unit, "a unit pint understands"
            ) from None
        for kind in _KIND_ORDER:
            k = units.KINDS[kind]
            probe = ureg.Quantity(1.0, k.si) if k.si else ureg.Quantity(1.0)
            if probe.dimensionality == dim:
                return kind if kind != "fraction" else None
        raise self.fail(key, f"the unit {unit!r} is of no kind fluxledger knows", unit)

    def inputs(self, raw: Any) -> dict[str, Input]:
        out: dict[str, Input] = {}
        self.table("inputs", raw, set(raw) if isinstance(raw, dict) else set(), set())
        for name, spec in raw.items():
            key = f"inputs.{name}"
            self.table(key, spec, {"kind", "title", "default"}, {"kind", "title"})
            kind = spec["kind"]
            if kind != "number" and kind not in units.KINDS:
                raise self.fail(
                    f"{key}.kind",
                    f"unknown kind {kind!r}",
                    kind,
                    "number or a kind of ledger.units",
                )
            kind_or_none = None if kind in ("number", "fraction") else kind
            default = spec.get("default")
            if default is not None:
                self.quantity(f"{key}.default", str(default), kind)
            self.kinds[self.name(key, name)] = kind_or_none
            out[name] = Input(
                name,
                kind if kind != "number" else None,
                self.text(f"{key}.title", spec["title"]),
                default,
            )
        return out

    def quantity(self, key: str, text: str, kind: str | None) -> float:
        try:
            if kind in (None, "number"):
                number, unit = units.split_number(text, field=key, expected="a number")
                if unit:
                    raise self.fail(key, f"{text!r} should be a plain number", text)
                return number
            return units.parse(text, kind, field=key)
        except InputError as exc:
            if exc.message.startswith(self.source):
                raise
            raise self.fail(key, exc.message, text) from None

    def expression(self, key: str, text: Any) -> Expr:
        try:
            expr = compile_expr(text, where=key)
        except ExpressionError as exc:
            raise self.fail(key, exc.message.removeprefix(f"{key}: "), text) from None
        unknown = sorted(expr.names - set(self.kinds))
        if unknown:
            raise self.fail(
                key,
                f"unknown name {unknown[0]!r} in {expr.text!r}",
                unknown[0],
                f"an input, a module fact or an earlier parameter: {', '.join(sorted(self.kinds))}",
            )
        return expr

    def dimension_of(self, key: str, expr: Expr) -> Any:
        import pint

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
        ureg = units.registry()
        got = self.dimension_of(key, expr)
        want = ureg.Quantity(1.0, units._clean_unit(unit)) if unit.strip() else ureg.Quantity(1.0)
        if got.dimensionality != want.dimensionality:
            raise self.fail(
                key,
                f"{expr.text!r} gives {got.dimensionality or 'a plain number'}, "
                f"but the unit {unit!r} is {want.dimensionality or 'dimensionless'}",
                expr.text,
                f"an expression in {unit or 'a plain number'}",
            )

    def parameters(self, raw: Any) -> list[Parameter]:
        if not isinstance(raw, dict) or not raw:
            raise self.fail("parameters", "expected at least one planned parameter")
        out = []
        for name, spec in raw.items():
            key = f"parameters.{name}"
            self.table(
                key,
                spec,
                {"title", "expr", "unit", "phase", "actual", "range"},
                {"title", "expr", "unit"},
            )
            unit = spec["unit"]
            if not isinstance(unit, str):
                raise self.fail(f"{key}.unit", f"expected a unit as text, got {unit!r}")
            kind = self.kind_of_unit(f"{key}.unit", unit)
            expr = self.expression(f"{key}.expr", spec["expr"])
            self.same_dimension(f"{key}.expr", expr, unit)
            actual = spec.get("actual")
            if actual is not None:
                self.metric(f"{key}.actual", actual, unit)
                if "range" not in spec:
                    raise self.fail(
                        f"{key}.range",
                        "a parameter measured on the skid log needs a range",
                        None,
                        "relative, low or high",
                    )
            # A range may name the parameter's own planned value as "plan".
            self.kinds["plan"] = kind
            try:
                rng = (
                    self.range(f"{key}.range", spec["range"], unit, kind)
                    if "range" in spec
                    else None
                )
            finally:
                del self.kinds["plan"]
            self.kinds[self.name(key, name)] = kind
            out.append(
                Parameter(
                    name=name,
                    title=self.text(f"{key}.title", spec["title"]),
                    expr=expr,
                    unit=unit,
                    kind=kind,
                    phase=spec.get("phase"),
                    actual=actual,
                    range=rng,
                )
            )
        return out

    def metric(self, key: str, metric: Any, unit: str) -> None:
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
        ureg = units.registry()
        si = units.KINDS[kind].si if kind else ""
        want = ureg.Quantity(1.0, si) if si else ureg.Quantity(1.0)
        have = ureg.Quantity(1.0, units._clean_unit(unit)) if unit.strip() else ureg.Quantity(1.0)
        if want.dimensionality != have.dimensionality:
            raise self.fail(
                key,
                f"the metric {metric!r} is a {kind or 'plain number'}, but the unit is {unit!r}",
                metric,
            )

    def range(self, key: str, raw: Any, unit: str, kind: str | None) -> AcceptanceRange:
        spec = self.table(key, raw, {"relative", "low", "high"}, set())
        if "relative" in spec:
            if set(spec) != {"relative"}:
                raise self.fail(key, "give either relative or low/high, not both")
            rel = self.quantity(f"{key}.relative", str(spec["relative"]), "fraction")
            if not 0 < rel < 1:
                raise self.fail(
                    f"{key}.relative",
                    f"{spec['relative']!r} is out of range",
                    spec["relative"],
                    "a fraction between 0 and 100 %",
                )
            return AcceptanceRange(relative=rel)
        if not spec:
            raise self.fail(key, "an empty range", None, "relative, low or high")
        return AcceptanceRange(
            low=self.bound(f"{key}.low", spec["low"], unit, kind) if "low" in spec else None,
            high=self.bound(f"{key}.high", spec["high"], unit, kind) if "high" in spec else None,
        )

    def bound(self, key: str, raw: Any, unit: str, kind: str | None) -> Bound:
        text = str(raw)
        if isinstance(raw, int | float) or _QUANTITY.match(text):
            if isinstance(raw, int | float) and kind is not None:
                raise self.fail(key, f"{raw!r} has no unit", raw, f"a quantity in {unit}")
            return Bound(text, None, self.quantity(key, text, kind or "number"))
        expr = self.expression(key, text)
        self.same_dimension(key, expr, unit)
        return Bound(text, expr)

    def steps(self, raw: Any) -> list[Step]:
        if not isinstance(raw, list) or not raw:
            raise self.fail("steps", "expected a list of steps ([[steps]])")
        out: list[Step] = []
        seen: set[str] = set()
        for i, spec in enumerate(raw, start=1):
            key = f"steps[{i}]"
            self.table(
                key,
                spec,
                {"operation", "phase", "title", "signatures", "text"},
                {"operation", "phase", "title", "signatures", "text"},
            )
            phase = self.text(f"{key}.phase", spec["phase"])
            if phase in seen:
                raise self.fail(f"{key}.phase", f"the phase {phase!r} appears twice", phase)
            seen.add(phase)
            out.append(
                Step(
                    operation=self.text(f"{key}.operation", spec["operation"]),
                    phase=phase,
                    title=self.text(f"{key}.title", spec["title"]),
                    signatures=self.meanings(f"{key}.signatures", spec["signatures"]),
                    text=self.text(f"{key}.text", spec["text"]),
                )
            )
        return out

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

    def check_step_texts(
        self, steps: list[Step], inputs: dict[str, Input], parameters: list[Parameter]
    ) -> None:
        from jinja2 import TemplateSyntaxError, meta
        from jinja2.sandbox import SandboxedEnvironment

        env = SandboxedEnvironment()
        known = {*inputs, *(p.name for p in parameters), *MODULE_NAMES, "module", "run"}
        for i, step in enumerate(steps, start=1):
            key = f"steps[{i}].text"
            try:
                ast_ = env.parse(step.text)
            except TemplateSyntaxError as exc:
                raise self.fail(
                    key, f"Jinja2 syntax error on line {exc.lineno}: {exc.message}"
                ) from None
            unknown = sorted(meta.find_undeclared_variables(ast_) - known)
            if unknown:
                raise self.fail(
                    key,
                    f"unknown name {unknown[0]!r} in the step text",
                    unknown[0],
                    "an input or a parameter",
                )

    def qc(self, raw: Any) -> list[QcAttribute]:
        out = []
        self.table("qc", raw, set(raw) if isinstance(raw, dict) else set(), set())
        for name, spec in raw.items():
            key = f"qc.{name}"
            self.table(key, spec, {"title", "unit", "low", "high", "method"}, {"title", "unit"})
            unit = spec["unit"]
            kind = self.kind_of_unit(f"{key}.unit", unit)
            if "low" not in spec and "high" not in spec:
                raise self.fail(key, "a QC attribute needs a specification (low, high or both)")
            low = (
                self.quantity(
                    f"{key}.low",
                    str(spec["low"]),
                    kind or ("fraction" if unit.strip() == "percent" else "number"),
                )
                if "low" in spec
                else None
            )
            high = (
                self.quantity(
                    f"{key}.high",
                    str(spec["high"]),
                    kind or ("fraction" if unit.strip() == "percent" else "number"),
                )
                if "high" in spec
                else None
            )
            if low is not None and high is not None and low > high:
                raise self.fail(key, "low is above high", (spec["low"], spec["high"]))
            out.append(
                QcAttribute(
                    name,
                    self.text(f"{key}.title", spec["title"]),
                    unit,
                    kind,
                    low,
                    high,
                    spec.get("method"),
                )
            )
        return out

    def optimum(self, raw: Any) -> Optimum | None:
        if raw is None:
            return None
        spec = self.table(
            "optimum",
            raw,
            {"concentration", "mass", "diavolumes"},
            {"concentration", "mass", "diavolumes"},
        )
        want = {"concentration": "concentration", "mass": "mass", "diavolumes": None}
        for k, kind in want.items():
            name = spec[k]
            if name not in self.kinds:
                raise self.fail(
                    f"optimum.{k}", f"unknown name {name!r}", name, "an input or a parameter"
                )
            if self.kinds[name] != kind:
                raise self.fail(
                    f"optimum.{k}",
                    f"{name!r} is a {self.kinds[name] or 'plain number'}",
                    name,
                    f"a {kind or 'plain number'}",
                )
        return Optimum(spec["concentration"], spec["mass"], spec["diavolumes"])
