"""Standard- and normal-volume flow units (SLPM, SCCM, SCFM, SCFH, NLPM, Nm^3/h) to and from mass flow.

A "standard litre" is the amount of gas that would fill one litre at a reference temperature and pressure, so
a standard volume flow is a mass flow in disguise: mass flow = standard volume flow * density at the
reference. Vendors and standards disagree on the reference (0 C, 15 C, 20 C, 21.1 C, 25 C, 60 F; 100 kPa or
101.325 kPa), and a wrong guess is a 7 % error in mass flow, so there is no default reference here: every
conversion of a standard unit names its ReferenceCondition. Normal units (NLPM, NM3H) are the exception that
carries its reference in the name: they are always at 0 C and 101.325 kPa (DIN 1343).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from monitor.errors import PhysicsError
from monitor.physics.gas import GasModelName, cacheable, canonical_gas, density_kg_m3
from monitor.units import CELSIUS_OFFSET_K, Q_, STANDARD_ATMOSPHERE_PA


@dataclass(frozen=True)
class ReferenceCondition:
    """Temperature and absolute pressure at which a standard volume is reckoned.

    Attributes:
        name: short name used in rig files, e.g. "0C".
        temperature_k: reference temperature, K.
        pressure_pa: reference absolute pressure, Pa.
        source: the standard or practice that defines it.
    """

    name: str
    temperature_k: float
    pressure_pa: float
    source: str


def _fahrenheit_k(value_degf: float) -> float:
    return float(Q_(value_degf, "degF").to("kelvin").magnitude)


_IUPAC_STANDARD_PRESSURE_PA = float(Q_(100.0, "kPa").to("Pa").magnitude)

REFERENCE_CONDITIONS: dict[str, ReferenceCondition] = {
    ref.name: ref
    for ref in (
        ReferenceCondition("0C", CELSIUS_OFFSET_K, STANDARD_ATMOSPHERE_PA,
                           "DIN 1343 normal conditions: 273.15 K, 101.325 kPa"),
        ReferenceCondition("normal", CELSIUS_OFFSET_K, STANDARD_ATMOSPHERE_PA,
                           "DIN 1343 normal conditions (same as '0C'): 273.15 K, 101.325 kPa"),
        ReferenceCondition("15C", CELSIUS_OFFSET_K + 15.0, STANDARD_ATMOSPHERE_PA,
                           "ISO 13443 standard reference conditions: 288.15 K, 101.325 kPa"),
        ReferenceCondition("20C", CELSIUS_OFFSET_K + 20.0, STANDARD_ATMOSPHERE_PA,
                           "20 C, 101.325 kPa: common practice in mass-flow meter datasheets"),
        ReferenceCondition("21.1C", _fahrenheit_k(70.0), STANDARD_ATMOSPHERE_PA,
                           "70 F (294.26 K), 101.325 kPa: common practice in US meter datasheets"),
        ReferenceCondition("25C", CELSIUS_OFFSET_K + 25.0, STANDARD_ATMOSPHERE_PA,
                           "25 C, 101.325 kPa: common practice (not IUPAC SATP, which is at 100 kPa)"),
        ReferenceCondition("SATP", CELSIUS_OFFSET_K + 25.0, _IUPAC_STANDARD_PRESSURE_PA,
                           "IUPAC standard ambient temperature and pressure: 298.15 K, 100 kPa"),
        ReferenceCondition("STP", CELSIUS_OFFSET_K, _IUPAC_STANDARD_PRESSURE_PA,
                           "IUPAC standard temperature and pressure (since 1982): 273.15 K, 100 kPa"),
        ReferenceCondition("60F", _fahrenheit_k(60.0), STANDARD_ATMOSPHERE_PA,
                           "US petroleum practice: 60 F (288.71 K), 14.696 psia taken as 1 atm"),
    )
}
_NORMAL = REFERENCE_CONDITIONS["0C"]


@dataclass(frozen=True)
class FlowUnit:
    """A standard- or normal-volume flow unit.

    Attributes:
        name: canonical name, e.g. "SLPM".
        volume_unit: the volume, as pint spells it.
        time_unit: the time, as pint spells it.
        normal: True if the unit fixes its own reference (0 C, 101.325 kPa, DIN 1343).
    """

    name: str
    volume_unit: str
    time_unit: str
    normal: bool


FLOW_UNITS: dict[str, FlowUnit] = {
    "SLPM": FlowUnit("SLPM", "liter", "minute", normal=False),
    "SLM": FlowUnit("SLPM", "liter", "minute", normal=False),
    "SCCM": FlowUnit("SCCM", "centimeter**3", "minute", normal=False),
    "SCFM": FlowUnit("SCFM", "foot**3", "minute", normal=False),
    "SCFH": FlowUnit("SCFH", "foot**3", "hour", normal=False),
    "NLPM": FlowUnit("NLPM", "liter", "minute", normal=True),
    "NM3H": FlowUnit("NM3H", "meter**3", "hour", normal=True),
}


def reference_condition(name: str | ReferenceCondition) -> ReferenceCondition:
    """Look up a reference condition by its short name (case-insensitive), or check one given directly.

    Args:
        name: a key of REFERENCE_CONDITIONS ("0C", "15C", "20C", "21.1C", "25C", "SATP", "STP", "60F",
            "normal"), or a ReferenceCondition for a vendor-specific reference.

    Returns:
        The ReferenceCondition.

    Raises:
        PhysicsError: an unknown name, or a given condition with a non-positive or non-finite
            temperature or pressure.
    """
    if isinstance(name, ReferenceCondition):
        for field, value in (("temperature_k", name.temperature_k), ("pressure_pa", name.pressure_pa)):
            if not (math.isfinite(value) and value > 0.0):
                raise PhysicsError(f"reference condition {name.name!r}: {field} = {value!r}, expected > 0")
        return name
    key = str(name).strip().lower()
    for ref in REFERENCE_CONDITIONS.values():
        if ref.name.lower() == key:
            return ref
    raise PhysicsError(
        f"reference = {name!r}: unknown reference condition; "
        f"expected one of {', '.join(REFERENCE_CONDITIONS)}"
    )


def flow_unit(name: str) -> FlowUnit:
    """Look up a flow unit by name (case-insensitive; "Nm3/h" is read as NM3H).

    Raises:
        PhysicsError: the unit is not one of FLOW_UNITS.
    """
    key = str(name).strip().upper().replace("/", "").replace("^", "")
    if key not in FLOW_UNITS:
        raise PhysicsError(f"unit = {name!r}: unknown flow unit; expected one of {', '.join(FLOW_UNITS)}")
    return FLOW_UNITS[key]


@lru_cache(maxsize=None)
def volume_flow_m3_s_per_unit(unit: str) -> float:
    """Volume flow of one unit (e.g. 1 SLPM = 1 L/min), m^3/s of gas at the unit's reference; via pint."""
    spec = flow_unit(unit)
    return float(Q_(1.0, f"{spec.volume_unit}/{spec.time_unit}").to("meter**3/second").magnitude)


def _resolve_reference(unit: str, reference: str | ReferenceCondition | None) -> ReferenceCondition:
    spec = flow_unit(unit)
    if spec.normal:
        if reference is None:
            return _NORMAL
        ref = reference_condition(reference)
        same = math.isclose(ref.temperature_k, _NORMAL.temperature_k, rel_tol=1e-9) and math.isclose(
            ref.pressure_pa, _NORMAL.pressure_pa, rel_tol=1e-9
        )
        if not same:
            raise PhysicsError(
                f"reference = {ref.name!r} ({ref.temperature_k:.6g} K, {ref.pressure_pa:.6g} Pa) contradicts "
                f"unit {spec.name}, which is always at 0 C and 101.325 kPa (DIN 1343); pass '0C' or None, "
                "or use a standard unit such as SLPM with that reference"
            )
        return ref
    if reference is None:
        raise PhysicsError(
            f"unit {spec.name} needs a reference condition (there is no default: vendors differ); "
            f"expected one of {', '.join(REFERENCE_CONDITIONS)} or a ReferenceCondition"
        )
    return reference_condition(reference)


@lru_cache(maxsize=256)
def _density_at(gas: str, temperature_k: float, pressure_pa: float, model: str) -> float:
    with cacheable():  # a rig's reference densities: kept between runs when a store is installed
        return float(density_kg_m3(gas, pressure_pa, temperature_k, model))  # type: ignore[arg-type]


def standard_density_kg_m3(
    gas: str, reference: str | ReferenceCondition, model: GasModelName = "real"
) -> float:
    """Density of the gas at a reference condition, kg/m^3.

    "real" uses the gas's reference equation of state (see monitor.physics.gas), which matches tabulated
    normal densities (e.g. CO2 1.977 kg/m^3 at 0 C, 101.325 kPa); "ideal" uses rho = p M / (R T), which
    some meter makers use instead; they differ by 0.05 % for N2 and 0.7 % for CO2 at 0 C.

    Args:
        gas: a name accepted by monitor.physics.gas.canonical_gas.
        reference: a reference-condition name or ReferenceCondition (no default).
        model: "real" or "ideal".

    Raises:
        PhysicsError: unknown gas, reference or model, or a reference where the gas is not a gas.
    """
    ref = reference_condition(reference)
    return _density_at(canonical_gas(gas), ref.temperature_k, ref.pressure_pa, model)


def _finite_array(value, name: str) -> np.ndarray:
    arr = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(arr)):
        raise PhysicsError(f"{name} = {value!r}: expected finite numbers")
    return arr


def _gas_factor(gas_correction_factor) -> np.ndarray:
    factor = _finite_array(gas_correction_factor, "gas_correction_factor")
    if np.any(factor <= 0.0):
        raise PhysicsError(f"gas_correction_factor = {gas_correction_factor!r}: expected > 0")
    return factor


def _kg_per_unit(unit: str, gas: str, reference, model: str) -> float:
    ref = _resolve_reference(unit, reference)
    volume_m3_s = volume_flow_m3_s_per_unit(flow_unit(unit).name)
    return volume_m3_s * standard_density_kg_m3(gas, ref, model)  # type: ignore[arg-type]


def standard_flow_to_mass_flow_kg_s(
    value,
    unit: str,
    gas: str,
    reference: str | ReferenceCondition | None,
    model: GasModelName = "real",
    gas_correction_factor=1.0,
) -> np.ndarray:
    """Mass flow from a standard- or normal-volume flow reading: m_dot = value * V_unit * K * rho_ref.

    The definition of a standard volume (volume the gas would occupy at the reference condition) gives
    m_dot = Q_std * rho(p_ref, T_ref). The gas correction factor K follows the convention of thermal
    mass-flow meter datasheets (common practice, no source): a meter calibrated on one gas (usually N2)
    reads `value` on another gas whose actual standard flow is value * K. Negative readings (zero offset,
    reverse flow on a bidirectional meter) are converted with their sign.

    Args:
        value: reading(s) in `unit`; float or array.
        unit: one of FLOW_UNITS (SLPM, SLM, SCCM, SCFM, SCFH, NLPM, NM3H).
        gas: the gas actually flowing, as accepted by canonical_gas.
        reference: reference condition of a standard unit (required); for NLPM and NM3H None, "0C" or
            "normal" (any other reference is rejected).
        model: "real" or "ideal" density at the reference.
        gas_correction_factor: K > 0 (dimensionless); 1.0 when the meter is calibrated on this gas.

    Returns:
        Mass flow, kg/s, of the broadcast shape of value and gas_correction_factor.

    Raises:
        PhysicsError: unknown unit, reference, gas or model; a reference that contradicts a normal unit;
            a non-finite value; a non-positive or non-finite gas_correction_factor.
    """
    flow = _finite_array(value, "value")
    factor = _gas_factor(gas_correction_factor)
    return np.asarray(flow * factor * _kg_per_unit(unit, gas, reference, model))


def mass_flow_to_standard_flow(
    mass_flow_kg_s,
    unit: str,
    gas: str,
    reference: str | ReferenceCondition | None,
    model: GasModelName = "real",
    gas_correction_factor=1.0,
) -> np.ndarray:
    """What a standard-flow meter would read for a given mass flow: value = m_dot / (V_unit * K * rho_ref).

    The inverse of standard_flow_to_mass_flow_kg_s, with the same conventions and arguments.

    Args:
        mass_flow_kg_s: mass flow(s), kg/s; float or array.
        unit, gas, reference, model, gas_correction_factor: as in standard_flow_to_mass_flow_kg_s.

    Returns:
        The reading in `unit`, of the broadcast shape of mass_flow_kg_s and gas_correction_factor.

    Raises:
        PhysicsError: as standard_flow_to_mass_flow_kg_s.
    """
    mass_flow = _finite_array(mass_flow_kg_s, "mass_flow_kg_s")
    factor = _gas_factor(gas_correction_factor)
    return np.asarray(mass_flow / (factor * _kg_per_unit(unit, gas, reference, model)))
