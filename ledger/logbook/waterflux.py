"""Water-flux tests: NWP at the reference temperature, recovery against baseline, status."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime

from ledger import __version__
from ledger.errors import InputError, RefusedError
from ledger.logbook import latest
from ledger.logbook.context import Work, apply, begin, integrity_passed_since
from ledger.logbook.required import optional, positive
from ledger.rules import water_test
from ledger.rules.sequence import after_water_test
from ledger.science import permeability as perm
from ledger.science import water
from ledger.store.tables import STAGES, UserAccount, WaterFluxTest

METHOD_ONE = "single point: NWP = Qp/(A·TMP) · µ(T)/µ(T_ref), µ by IAPWS R12-08"
METHOD_SLOPE = "several points: NWP = slope of J·µ(T)/µ(T_ref) against TMP (least squares)"


@dataclass(frozen=True)
class WaterPoint:
    """One reading in SI: pressures (Pa gauge), and a flow or a volume collected over a time."""

    feed_pa: float
    retentate_pa: float
    permeate_pa: float
    flow_m3_s: float | None = None
    volume_m3: float | None = None
    time_s: float | None = None

    def check_tmp(self, index: int) -> float:
        tmp = perm.transmembrane_pressure(self.feed_pa, self.retentate_pa, self.permeate_pa)
        if not tmp > 0:
            raise InputError(
                f"TMP = (feed + retentate)/2 − permeate = {tmp / 1e5:.4g} bar is not positive",
                field="feed",
                value=self.feed_pa,
                expected="feed and retentate pressures above the permeate pressure",
                index=index,
            )
        return tmp

    def flow(self, index: int) -> float:
        if self.flow_m3_s is not None:
            if self.volume_m3 is not None or self.time_s is not None:
                raise InputError(
                    "give a flow or a volume over a time, not both",
                    field="flow",
                    value=self.flow_m3_s,
                    expected="one of the two",
                    index=index,
                )
            return positive(
                "flow", self.flow_m3_s, "a flow above zero", label="permeate flow", index=index
            )
        if self.volume_m3 is None or self.time_s is None:
            raise InputError(
                "each point needs a permeate flow, or a volume and a time",
                field="flow",
                value=None,
                expected="--flow, or --volume and --time",
                index=index,
            )
        volume = positive(
            "volume", self.volume_m3, "a volume above zero", label="collected volume", index=index
        )
        time = positive(
            "time", self.time_s, "a time above zero", label="collection time", index=index
        )
        return volume / time


def _stage(stage: str) -> str:
    key = stage.replace("-", "_")
    if key not in STAGES:
        raise InputError(
            f"stage {stage!r} is unknown",
            field="stage",
            value=stage,
            expected="baseline, pre-use, post-use or post-clean",
        )
    return key


def record_water_test(
    session: object,
    actor: UserAccount,
    serial: str,
    stage: str,
    points: list[WaterPoint],
    temperature_k: float,
    *,
    water_grade: str | None = None,
    activity_at: datetime | None = None,
    note: str | None = None,
    entered: dict[str, str] | None = None,
) -> tuple[WaterFluxTest, str | None]:
    """Record a test; return it and a note on what the status became (hold, available...).

    ``entered`` holds the quantities as the person typed them (field -> "20 psi"), kept
    beside the SI values so that they are shown as typed."""
    stage = _stage(stage)
    work = begin(session, actor, serial, f"water:{stage}", activity_at)  # type: ignore[arg-type]
    water.check_temperature(temperature_k)
    if not points:
        raise InputError(
            "a water-flux test needs at least one point",
            field="points",
            value=0,
            expected="one or more TMP points",
        )
    area = work.mtype.area_m2
    t_ref = work.mtype.reference_temperature_k
    flows = [p.flow(i) for i, p in enumerate(points)]
    for i, p in enumerate(points):
        p.check_tmp(i)
    nwp_points = []
    for i, (p, q) in enumerate(zip(points, flows, strict=True)):
        try:
            nwp_points.append(
                perm.normalized_permeability(
                    q, area, p.feed_pa, p.retentate_pa, p.permeate_pa, temperature_k, t_ref
                )
            )
        except InputError as err:
            err.index = i
            raise
    factor = nwp_points[0].factor
    intercept = r2 = None
    if len(points) == 1:
        nwp, method = nwp_points[0].nwp, METHOD_ONE
    else:
        slope = perm.nwp_from_points(
            [n.flux for n in nwp_points], [n.tmp for n in nwp_points], [temperature_k], t_ref
        )
        nwp, intercept, r2, method = slope.nwp, slope.intercept, slope.r_squared, METHOD_SLOPE
    if not nwp > 0:
        raise InputError(
            "the points give a non-positive NWP (flux falls as TMP rises)",
            field="points",
            value=nwp,
            expected="flux rising with TMP",
        )
    resistance = perm.resistance_from_permeability(nwp / factor, water.viscosity(temperature_k))
    baseline = latest.water(session, work.module_id, "baseline")  # type: ignore[arg-type]
    recovery = verdict = None
    if stage != "baseline":
        if baseline is None:
            raise RefusedError(
                f"module {serial} has no valid baseline water-flux test",
                field="serial",
                value=serial,
            )
        recovery = perm.recovery(nwp, baseline.nwp_m_s_pa)
        verdict = _verdict(work, stage, nwp, recovery)
    test = WaterFluxTest(
        module_id=work.module_id,
        activity_at=work.at,
        late=work.late,
        limits_version_id=work.limits_version_id,
        note=optional("note", note, "a remark"),
        stage=stage,
        water_grade=optional("water_grade", water_grade, "e.g. WFI or PW", kind="name"),
        temperature_k=temperature_k,
        reference_temperature_k=t_ref,
        points=[
            {k: v for k, v in {**p.__dict__, "flow_m3_s": q}.items() if v is not None}
            for p, q in zip(points, flows, strict=True)
        ],
        tmp_pa=sum(n.tmp for n in nwp_points) / len(nwp_points),
        flux_m_s=sum(n.flux for n in nwp_points) / len(nwp_points),
        nwp_m_s_pa=nwp,
        intercept_m_s=intercept,
        r_squared=r2,
        resistance_per_m=resistance,
        baseline_test_id=baseline.id if baseline is not None and stage != "baseline" else None,
        recovery=recovery,
        verdict=verdict,
        method=method,
        method_version=f"fluxledger {__version__}",
        entered=entered or None,
    )
    work.journal.create(test)
    return test, _advance(work, test)


def _verdict(work: Work, stage: str, nwp: float, recovery: float) -> str | None:
    lim = work.mtype
    ratio = None
    if stage == "pre_use":
        post = latest.water(work.session, work.module_id, "post_clean")
        ratio = nwp / post.nwp_m_s_pa if post is not None else None
    return water_test.verdict(
        stage,
        recovery=recovery,
        preuse_ratio=ratio,
        recovery_min=lim.recovery_min,
        recovery_alert=lim.recovery_alert,
        preuse_band=lim.preuse_band,
    )


def _advance(work: Work, test: WaterFluxTest) -> str | None:
    lim = work.mtype
    step = after_water_test(
        work.module.status,
        test.stage,
        recovery=test.recovery,
        recovery_min=lim.recovery_min,
        damage_ratio=lim.damage_ratio,
        integrity_passed=integrity_passed_since(work),
    )
    return apply(work, step, ("water_flux_test", test.id))
