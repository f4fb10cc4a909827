"""Plan a run: every planned parameter of a template from the inputs and the chosen module.

Values are SI floats. A parameter whose expression names a fact the module type does not
state (no maximum loading, say) is not computed, and the plan says why. A parameter with an
acceptance range but no skid-log metric is checked at planning time (module loading against
the type's maximum); one that fails refuses the plan. With scouting flux-vs-concentration
points and a template that names its diafiltration concentration, product mass and
diavolumes, the plan adds the gel-model optimum (Ng, Lundblad & Mitra, Sep. Sci. 11 (1976)
499) with the time and buffer it would save.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, field
from typing import Any

from ledger import units
from ledger.errors import DomainError, InputError
from ledger.rules.acceptance import judge
from ledger.runs.template import Parameter, Template


@dataclass(frozen=True)
class ModuleFacts:
    """The chosen module and the geometry of its type (SI)."""

    serial: str
    type_code: str
    area_m2: float
    fibers: int
    lumen_diameter_m: float
    fiber_length_m: float
    max_volume_loading_m: float | None = None
    max_mass_loading_kg_m2: float | None = None

    def names(self) -> dict[str, float | None]:
        return {
            "area": self.area_m2,
            "fibers": float(self.fibers),
            "lumen_diameter": self.lumen_diameter_m,
            "fiber_length": self.fiber_length_m,
            "max_volume_loading": self.max_volume_loading_m,
            "max_mass_loading": self.max_mass_loading_kg_m2,
        }


@dataclass(frozen=True)
class Planned:
    """One planned parameter: its value and acceptance range (SI), shown in ``unit``."""

    name: str
    title: str
    unit: str
    kind: str | None
    value: float | None
    low: float | None
    high: float | None
    rule: str  # the acceptance rule in words, with its numbers
    phase: str | None
    actual: str | None  # the skid-log metric that measures it; None: a plan value only
    missing: str | None = None  # why the value could not be computed


@dataclass(frozen=True)
class PlanCheck:
    name: str
    verdict: str  # PASS, FAIL, MISSING
    text: str


@dataclass(frozen=True)
class Advice:
    """Diafiltration at the planned concentration against the gel-model optimum (SI)."""

    k_m_s: float
    gel_concentration_kg_m3: float
    r_squared: float | None
    points: int
    planned_concentration_kg_m3: float
    optimum_concentration_kg_m3: float
    planned_time_s: float
    optimum_time_s: float
    time_saved_s: float
    planned_buffer_m3: float
    optimum_buffer_m3: float
    buffer_saved_m3: float
    note: str


@dataclass
class Plan:
    template_id: str
    template_version: str
    template_sha256: str
    module: ModuleFacts
    inputs: dict[str, float]  # SI, defaults filled in
    given: dict[str, str]  # the texts the user typed
    values: list[Planned]
    checks: list[PlanCheck]
    steps: list[dict[str, Any]]  # operation, phase, title, signatures, text (rendered)
    advice: Advice | None = None
    notes: list[str] = field(default_factory=list)
    # Planned for another product than the template's, and why (None: the same product).
    product_override_reason: str | None = None

    def value(self, name: str) -> Planned:
        return next(v for v in self.values if v.name == name)

    def to_record(self) -> dict[str, Any]:
        """A JSON-ready dict (SI) that :meth:`from_record` reads back exactly."""
        return asdict(self)

    @classmethod
    def from_record(cls, d: Mapping[str, Any]) -> Plan:
        d = dict(d)
        d["module"] = ModuleFacts(**d["module"])
        d["values"] = [Planned(**v) for v in d["values"]]
        d["checks"] = [PlanCheck(**c) for c in d["checks"]]
        d["advice"] = Advice(**d["advice"]) if d.get("advice") else None
        return cls(**d)


def show(value: float | None, unit: str, kind: str | None) -> str:
    """A value in the template's display unit, four significant digits: "1,234 mL/min"."""
    if value is None:
        return "—"
    shown = display(value, unit, kind)
    text = f"{shown:,.4g}" if abs(shown) < 1e6 else f"{shown:.3e}"
    if "e" not in text and abs(shown) >= 1000:
        text = f"{round(shown):,}"
    spelled = {"percent": "%", "degC": "°C", "L/(m^2*h)": "LMH", "L/m^2": "L/m²", "m^2": "m²",
               "g/m^2": "g/m²"}  # fmt: skip
    unit = spelled.get(unit, unit)
    return f"{text} {unit}".strip() if unit != "%" else f"{text} %"


def display(value: float, unit: str, kind: str | None) -> float:
    """An SI value expressed in ``unit``."""
    if not unit.strip():
        return value
    ureg = units.registry()
    si = units.KINDS[kind].si if kind else ""
    q = ureg.Quantity(value, si) if si else ureg.Quantity(value)
    return float(q.to(units._clean_unit(unit)).magnitude)


class InputsError(InputError):
    """Every missing or wrong ``--input`` of one plan at once; ``problems`` holds each (its
    ``field`` is ``input``, its ``value`` what was typed or the input's name) and the message
    lists one per line."""

    def __init__(self, template_id: str, problems: Sequence[InputError]) -> None:
        first = problems[0]
        if len(problems) == 1:
            message = str(first)
        else:
            lines = "\n".join(f"  {p}" for p in problems)
            message = f"{len(problems)} inputs of {template_id} are missing or wrong:\n{lines}"
        super().__init__(message, field=first.field, value=first.value)
        self.problems = tuple(problems)


def parse_inputs(template: Template, given: Mapping[str, str]) -> dict[str, float]:
    """The inputs in SI: typed values (``name -> "2 L"``) over the template's defaults.

    Every unknown, missing and malformed input is reported together, as one InputsError.
    """
    problems: list[InputError] = []
    known = ", ".join(template.inputs)
    for name in sorted(set(given) - set(template.inputs)):
        problems.append(
            InputError(
                f"--input {name}: {template.id} has no input {name!r}",
                field="input",
                value=name,
                expected=f"one of {known}",
            )
        )
    out: dict[str, float] = {}
    for name, spec in template.inputs.items():
        text = given.get(name, spec.default)
        if text is None:
            problems.append(
                InputError(
                    f"--input {name}=...: {spec.title} is required by {template.id}",
                    field="input",
                    value=name,
                    expected=f"--input {name}=<{spec.kind or 'number'}>",
                )
            )
            continue
        try:
            out[name] = _input_value(name, spec.kind, text)
        except InputError as exc:
            exc.field = "input"  # the option; the message names which input
            problems.append(exc)
    if problems:
        raise InputsError(template.id, problems)
    return out


def _input_value(name: str, kind: str | None, text: str) -> float:
    where = f"--input {name}"
    if kind is not None:
        return units.parse(text, kind, field=where)
    number, unit = units.split_number(text, field=where, expected="a plain number")
    if unit:
        raise InputError(
            f"{where}: {text!r} should be a plain number",
            field="input",
            value=text,
            expected="a plain number",
        )
    return number


def make_plan(
    template: Template,
    module: ModuleFacts,
    given: Mapping[str, str],
    *,
    product: str = "",
    lot: str = "",
    scouting: Sequence[tuple[float, float]] | None = None,
) -> Plan:
    """Compute the plan; ``scouting`` is [(concentration kg/m³, flux m/s), ...]."""
    inputs = parse_inputs(template, given)
    env: dict[str, float | None] = {**module.names(), **inputs}
    planned: dict[str, Planned] = {}
    for p in template.evaluation_order():
        planned[p.name] = _evaluate(p, env, template)
        env[p.name] = planned[p.name].value
    values = [planned[p.name] for p in template.parameters]
    checks = [_plan_check(v) for v in values if v.actual is None and v.rule]
    plan = Plan(
        template_id=template.id,
        template_version=template.version,
        template_sha256=template.sha256,
        module=module,
        inputs=inputs,
        given=dict(given),
        values=values,
        checks=checks,
        steps=[],
        notes=list(template.notes),
    )
    if scouting is not None:
        plan.advice = _advice(template, env, module, scouting)
    plan.steps = _render_steps(template, plan, product, lot)
    return plan


def _evaluate(p: Parameter, env: Mapping[str, float | None], template: Template) -> Planned:
    where = f"{template.source}: parameters.{p.name}"
    missing = sorted(n for n in p.expr.names if env[n] is None)
    value = None if missing else _run(p.expr, env, where)
    low = high = None
    rule = ""
    absent: list[str] = []
    if p.range is not None:
        if p.range.relative is not None:
            if value is not None:
                low, high = value * (1 - p.range.relative), value * (1 + p.range.relative)
            rule = f"±{p.range.relative * 100:g} %"
        else:
            own = {**env, "plan": value}
            low, why_low = _bound(p.range.low, own, where)
            high, why_high = _bound(p.range.high, own, where)
            absent = [w for w in (why_low, why_high) if w]
            rule = ""
        rule = _rule_text(rule, low, high, p.unit, p.kind, bool(absent))
    note = None
    if missing:
        note = f"not computed: the module type states no {_words(missing)}"
    elif absent:
        note = f"limit not set: the module type states no {_words(absent)}"
    return Planned(
        name=p.name,
        title=p.title,
        unit=p.unit,
        kind=p.kind,
        value=value,
        low=low,
        high=high,
        rule=rule,
        phase=p.phase,
        actual=p.actual,
        missing=note,
    )


def _words(names: Sequence[str]) -> str:
    return ", ".join(n.replace("max_", "maximum ").replace("_", " ") for n in names)


def _run(expr: Any, env: Mapping[str, float | None], where: str) -> float:
    try:
        value = float(expr.evaluate(env))
    except DomainError as exc:
        raise InputError(f"{where}: {exc.message}", field=exc.field, value=exc.value) from None
    except (ZeroDivisionError, OverflowError, ValueError) as exc:
        raise InputError(
            f"{where}: {expr.text!r} cannot be evaluated with these inputs ({exc})",
            field="input",
            value=expr.text,
            expected="inputs that give a finite value",
        ) from None
    if not math.isfinite(value):
        raise InputError(
            f"{where}: {expr.text!r} is not finite with these inputs",
            field="input",
            value=expr.text,
            expected="inputs that give a finite value",
        )
    return value


def _bound(bound: Any, env: Mapping[str, float | None], where: str) -> tuple[float | None, str]:
    if bound is None:
        return None, ""
    if bound.expr is None:
        return bound.value, ""
    missing = sorted(n for n in bound.expr.names if env[n] is None)
    if missing:
        return None, ", ".join(missing)
    return _run(bound.expr, env, where), ""


def _rule_text(
    prefix: str, low: float | None, high: float | None, unit: str, kind: str | None, absent: bool
) -> str:
    if low is not None and high is not None:
        span = f"{show(low, unit, kind).split(' ', 1)[0]}–{show(high, unit, kind)}"
    elif high is not None:
        span = f"≤ {show(high, unit, kind)}"
    elif low is not None:
        span = f"≥ {show(low, unit, kind)}"
    else:
        span = "no limit set" if absent else ""
    return f"{prefix}: {span}" if prefix and span else prefix or span


def _plan_check(v: Planned) -> PlanCheck:
    if v.value is None or (v.low is None and v.high is None):
        return PlanCheck(v.name, "MISSING", f"{v.title}: {v.missing or 'not computed'}")
    verdict = judge(v.value, v.low, v.high)
    return PlanCheck(v.name, verdict, f"{v.title} {show(v.value, v.unit, v.kind)} ({v.rule})")


def _advice(
    template: Template,
    env: Mapping[str, float | None],
    module: ModuleFacts,
    points: Sequence[tuple[float, float]],
) -> Advice | None:
    from ledger.science import gel

    if template.optimum is None:
        raise InputError(
            f"template {template.id} names no diafiltration concentration for the optimum",
            field="scouting",
            value=template.id,
            expected="a template with an [optimum] table",
        )
    o = template.optimum
    c, m, n = env[o.concentration], env[o.mass], env[o.diavolumes]
    if c is None or m is None or n is None:
        return None
    fit = gel.fit_gel_model([p[0] for p in points], [p[1] for p in points])
    cmp = gel.compare_with_optimum(fit, m, c, n, module.area_m2)
    note = (
        f"diafiltration at the optimum {fit.cg_kg_m3 / math.e:.4g} kg/m³ would take "
        f"{cmp.optimum.time_s / 60:.4g} min against {cmp.chosen.time_s / 60:.4g} min planned"
    )
    return Advice(
        k_m_s=fit.k_m_s,
        gel_concentration_kg_m3=fit.cg_kg_m3,
        r_squared=fit.r_squared,
        points=len(points),
        planned_concentration_kg_m3=c,
        optimum_concentration_kg_m3=cmp.optimum.concentration_kg_m3,
        planned_time_s=cmp.chosen.time_s,
        optimum_time_s=cmp.optimum.time_s,
        time_saved_s=cmp.extra_time_s,
        planned_buffer_m3=cmp.chosen.buffer_volume_m3,
        optimum_buffer_m3=cmp.optimum.buffer_volume_m3,
        buffer_saved_m3=cmp.buffer_difference_m3,
        note=note,
    )


def _render_steps(template: Template, plan: Plan, product: str, lot: str) -> list[dict[str, Any]]:
    from jinja2 import StrictUndefined
    from jinja2.sandbox import SandboxedEnvironment

    env = SandboxedEnvironment(undefined=StrictUndefined, autoescape=False)
    names: dict[str, Any] = {}
    for name, spec in template.inputs.items():
        unit = units.KINDS[spec.kind].display if spec.kind else ""
        names[name] = show(plan.inputs[name], unit, spec.kind if spec.kind != "fraction" else None)
    for v in plan.values:
        names[v.name] = show(v.value, v.unit, v.kind)
    m = plan.module
    names.update(
        area=show(m.area_m2, "m^2", "area"),
        fibers=str(m.fibers),
        lumen_diameter=show(m.lumen_diameter_m, "mm", "length"),
        fiber_length=show(m.fiber_length_m, "cm", "length"),
        max_volume_loading=show(m.max_volume_loading_m, "L/m^2", "areal_volume"),
        max_mass_loading=show(m.max_mass_loading_kg_m2, "g/m^2", "areal_mass"),
        module={"serial": m.serial, "type": m.type_code},
        run={"product": product, "lot": lot},
    )
    out = []
    for s in template.steps:
        out.append(
            {
                "operation": s.operation,
                "phase": s.phase,
                "title": s.title,
                "signatures": list(s.signatures),
                "text": " ".join(env.from_string(s.text).render(**names).split()),
            }
        )
    return out
