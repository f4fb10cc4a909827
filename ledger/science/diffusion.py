"""Flow-type integrity tests: gas diffusion through a wetted membrane, and water intrusion.

All quantities SI: pressures in Pa (gauge unless a name says absolute), volumes in m³, flows
in m³/s, molar flows in mol/s, temperatures in K.

- Diffusion (forward-flow) test: with the membrane wetted and the upstream side held at a test
  pressure below the bubble point, gas dissolves in the liquid in the pores, diffuses across
  and leaves downstream. The flow is either read directly on a flow meter or derived from the
  upstream pressure decay: the gas lost from the closed upstream volume V_up is
  ṅ = V_up·(dP/dt)/(R·T) (ideal gas, isothermal hold, rigid volume), and as a volume at
  pressure p and temperature T_ref, Q = ṅ·R·T_ref/p. At the test temperature and atmospheric
  pressure this is Q = V_up·(dP/dt)/P_atm, the conversion of the pressure-decay test in the
  USEPA Membrane Filtration Guidance Manual (EPA 815-R-06-009, 2005, ch. 4).
- Water intrusion test (hydrophobic membranes): the housing is filled with water upstream and
  the gas above it is pressurized; water entering the membrane makes room for the gas, whose
  pressure falls. By Boyle's law (p·V constant at constant temperature) the gas volume grows at
  dV/dt = V_gas·(−dp/dt)/p, with p the absolute pressure at which V_gas is stated, and that
  is the intrusion flow of water.

Gas constant R = N_A·k = 8.31446261815324 J/(mol·K), exact in the 2019 SI (CODATA 2018 prints
it as 8.314 462 618... J/(mol·K)).
Normal conditions for reporting a gas volume: 273.15 K and 101.325 kPa (DIN 1343).
"""

from __future__ import annotations

from ledger.errors import out_of_range
from ledger.science.guards import finite, positive, within
from ledger.science.integrity import STANDARD_ATMOSPHERE_PA, checked_decay_rate

GAS_CONSTANT_J_MOL_K = 6.02214076e23 * 1.380649e-23  # N_A·k, both exact since 2019
NORMAL_TEMPERATURE_K = 273.15
NORMAL_PRESSURE_PA = 101325.0

GAS_TEMPERATURE_MIN_K = 250.0
GAS_TEMPERATURE_MAX_K = 400.0
_T_RANGE = "an absolute temperature from 250 K to 400 K (convert °C to K first)"


def _temperature(name: str, value: float) -> float:
    return within(name, value, GAS_TEMPERATURE_MIN_K, GAS_TEMPERATURE_MAX_K, _T_RANGE)


def gas_molar_flow_from_decay(
    decay_rate_pa_s: float, upstream_volume_m3: float, temperature_k: float
) -> float:
    """Amount of gas leaving a closed upstream volume (mol/s) from its pressure decay.

    ṅ = V_up·(dP/dt)/(R·T): V_up the upstream gas volume (m³), dP/dt the decay rate (Pa/s,
    ≥ 0; gauge and absolute rates are equal), T the gas temperature (K). Ideal gas, constant
    temperature and volume during the hold.
    """
    rate = checked_decay_rate(decay_rate_pa_s)
    volume = positive("upstream_volume_m3", upstream_volume_m3)
    t = _temperature("temperature_k", temperature_k)
    return volume * rate / (GAS_CONSTANT_J_MOL_K * t)


def gas_volume_flow(molar_flow_mol_s: float, pressure_abs_pa: float, temperature_k: float) -> float:
    """Volume flow (m³/s) of an ideal gas flowing at ``molar_flow_mol_s`` (mol/s), expressed at
    absolute pressure p (Pa) and temperature T (K): Q = ṅ·R·T/p."""
    n = finite("molar_flow_mol_s", molar_flow_mol_s)
    if n < 0.0:
        raise out_of_range("molar_flow_mol_s", molar_flow_mol_s, "a value of zero or more")
    p = positive("pressure_abs_pa", pressure_abs_pa)
    t = _temperature("temperature_k", temperature_k)
    return n * GAS_CONSTANT_J_MOL_K * t / p


def diffusion_flow_from_decay(
    decay_rate_pa_s: float,
    upstream_volume_m3: float,
    temperature_k: float,
    *,
    reference_pressure_abs_pa: float = STANDARD_ATMOSPHERE_PA,
    reference_temperature_k: float | None = None,
) -> float:
    """Diffusion (forward) flow through a wetted membrane (m³/s) from an upstream pressure decay.

    Q = V_up·(dP/dt)/p_ref · T_ref/T: the gas lost from the upstream volume V_up (m³) at the
    decay rate dP/dt (Pa/s) and test temperature T (K), as a volume at the reference absolute
    pressure p_ref (default 101325 Pa) and reference temperature T_ref (default: the test
    temperature, which gives Q = V_up·(dP/dt)/P_atm of EPA 815-R-06-009, ch. 4). For normal
    conditions pass NORMAL_PRESSURE_PA and NORMAL_TEMPERATURE_K.
    """
    n = gas_molar_flow_from_decay(decay_rate_pa_s, upstream_volume_m3, temperature_k)
    if reference_temperature_k is None:
        t_ref = float(temperature_k)  # checked by gas_molar_flow_from_decay
    else:
        t_ref = _temperature("reference_temperature_k", reference_temperature_k)
    p_ref = positive("reference_pressure_abs_pa", reference_pressure_abs_pa)
    return n * GAS_CONSTANT_J_MOL_K * t_ref / p_ref


def gas_flow_at_reference(
    flow_m3_s: float,
    pressure_abs_pa: float,
    temperature_k: float,
    *,
    reference_pressure_abs_pa: float = NORMAL_PRESSURE_PA,
    reference_temperature_k: float = NORMAL_TEMPERATURE_K,
) -> float:
    """A gas volume flow measured directly (m³/s, at absolute pressure p and temperature T)
    restated at reference conditions (default normal conditions, 273.15 K, 101325 Pa).

    Q_ref = Q·(p/p_ref)·(T_ref/T), the ideal gas law at constant molar flow. Use it for a
    flow-meter reading of the diffusion flow before comparing it with a limit stated at other
    conditions.
    """
    q = finite("flow_m3_s", flow_m3_s)
    if q < 0.0:
        raise out_of_range("flow_m3_s", flow_m3_s, "a value of zero or more")
    p = positive("pressure_abs_pa", pressure_abs_pa)
    t = _temperature("temperature_k", temperature_k)
    p_ref = positive("reference_pressure_abs_pa", reference_pressure_abs_pa)
    t_ref = _temperature("reference_temperature_k", reference_temperature_k)
    return q * (p / p_ref) * (t_ref / t)


def _absolute(test_pressure_pa: float, atmospheric_pressure_pa: float, name: str) -> float:
    p_atm = positive("atmospheric_pressure_pa", atmospheric_pressure_pa)
    gauge = finite(name, test_pressure_pa)
    if gauge <= 0.0:
        raise out_of_range(name, test_pressure_pa, "a gauge pressure greater than zero")
    return gauge + p_atm


def water_intrusion_flow(
    decay_rate_pa_s: float,
    gas_volume_m3: float,
    test_pressure_pa: float,
    atmospheric_pressure_pa: float = STANDARD_ATMOSPHERE_PA,
) -> float:
    """Water intrusion flow (m³/s of water) into a hydrophobic membrane from the pressure decay
    of the gas over the water in the upstream housing.

    Q = V_gas·(dP/dt)/p, Boyle's law: V_gas the upstream gas volume (m³) at the test pressure,
    dP/dt the decay rate (Pa/s, ≥ 0), p = test pressure (Pa gauge, > 0) + atmospheric pressure
    (Pa absolute) the absolute gas pressure. Isothermal; the decay is small against p.
    """
    rate = checked_decay_rate(decay_rate_pa_s)
    volume = positive("gas_volume_m3", gas_volume_m3)
    p_abs = _absolute(test_pressure_pa, atmospheric_pressure_pa, "test_pressure_pa")
    return volume * rate / p_abs


def water_intrusion_volume(
    gas_volume_m3: float,
    start_pressure_pa: float,
    end_pressure_pa: float,
    atmospheric_pressure_pa: float = STANDARD_ATMOSPHERE_PA,
) -> float:
    """Water volume (m³) that entered the membrane while the gas pressure fell from
    ``start_pressure_pa`` to ``end_pressure_pa`` (both Pa gauge, start ≥ end > 0).

    Boyle's law without the small-decay approximation: p0·V0 = p1·(V0 + ΔV), so
    ΔV = V0·(p0/p1 − 1), with V0 the gas volume (m³) at the start pressure and p absolute.
    Divided by the hold time it is the mean intrusion flow.
    """
    volume = positive("gas_volume_m3", gas_volume_m3)
    p0 = _absolute(start_pressure_pa, atmospheric_pressure_pa, "start_pressure_pa")
    p1 = _absolute(end_pressure_pa, atmospheric_pressure_pa, "end_pressure_pa")
    if p1 > p0:
        raise out_of_range(
            "end_pressure_pa",
            end_pressure_pa,
            f"a value no higher than start_pressure_pa ({start_pressure_pa!r} Pa): a rising "
            "pressure implies no intrusion",
        )
    return volume * (p0 / p1 - 1.0)
