"""SI constants and the one pint registry: turns quantities with units ("300 bar gauge", "2 L") into SI floats.

Inside ejecta every number is a float in SI units with the unit in its name. Conversion happens only at the
edges (rig file, drivers, display) and goes through pint, never through a hand-written factor table.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

import pint

from monitor.errors import ConfigError

# Standard acceleration of gravity, exact by definition (3rd CGPM, 1901).
G0_M_S2 = 9.80665
# Molar gas constant, exact since the 2019 SI redefinition (CODATA 2018).
R_J_PER_MOL_K = 6.02214076e23 * 1.380649e-23  # N_A k = 8.31446261815324...
# Standard atmosphere at sea level (ISO 2533).
STANDARD_ATMOSPHERE_PA = 101325.0
# Kelvin offset of the Celsius scale (exact).
CELSIUS_OFFSET_K = 273.15

UREG = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
Q_ = UREG.Quantity

# The SI unit each kind of quantity is stored in, as pint spells it.
SI_UNITS: dict[str, str] = {
    "pressure": "pascal",
    "temperature": "kelvin",
    "length": "meter",
    "area": "meter**2",
    "volume": "meter**3",
    "mass": "kilogram",
    "force": "newton",
    "time": "second",
    "velocity": "meter/second",
    "acceleration": "meter/second**2",
    "mass_flow": "kilogram/second",
    "angle": "radian",
    "impulse": "newton*second",
    "energy": "joule",
    "dimensionless": "dimensionless",
}

_GAUGE_WORDS = {"gauge", "g", "(g)", "gage"}
_ABSOLUTE_WORDS = {"abs", "absolute", "a", "(a)"}
_CELSIUS = re.compile(r"(?<![A-Za-z])(?:°\s*C|deg\s*C|C|celsius)$", re.IGNORECASE)
_FAHRENHEIT = re.compile(r"(?<![A-Za-z])(?:°\s*F|deg\s*F|F|fahrenheit)$", re.IGNORECASE)


@lru_cache(maxsize=512)
def _parse(text: str) -> pint.Quantity:
    return Q_(text)


def _normalise_temperature(text: str) -> str:
    """Read "20 C" and "68 F" as temperatures, never as coulomb or farad."""
    stripped = text.strip()
    stripped = _CELSIUS.sub("degC", stripped)
    return _FAHRENHEIT.sub("degF", stripped)


def parse_quantity(value: object, kind: str, key: str, source: str | None = None) -> float:
    """Turn a quantity with a unit into an SI float.

    Args:
        value: a string such as "2.0 L", "15 deg" or "20 C"; a bare number is accepted only for
            dimensionless kinds, because a bare number in a rig file is the commonest unit error.
        kind: one of the keys of SI_UNITS.
        key: the rig-file key, for the error message.
        source: the file name, for the error message.

    Returns:
        The magnitude in the SI unit of SI_UNITS[kind].

    Raises:
        ConfigError: no unit, the wrong dimension, or text pint cannot read.
    """
    target = SI_UNITS[kind]
    if isinstance(value, bool):
        raise ConfigError(key, value, f"a {kind} with a unit", source)
    if isinstance(value, (int, float)):
        if kind == "dimensionless":
            return _finite(float(value), key, kind, source)
        raise ConfigError(key, value, f"a {kind} with its unit, as a string such as {_EXAMPLES[kind]!r}", source)
    if not isinstance(value, str):
        raise ConfigError(key, value, f"a {kind} as a string such as {_EXAMPLES[kind]!r}", source)
    text = _normalise_temperature(value) if kind == "temperature" else value.strip()
    try:
        quantity = _parse(text)
        if not isinstance(quantity, pint.Quantity):
            quantity = Q_(float(quantity), "dimensionless")
        if kind != "dimensionless" and quantity.unitless:
            raise ConfigError(key, value, f"a {kind} with its unit, such as {_EXAMPLES[kind]!r}", source)
        magnitude = float(quantity.to(target).magnitude)
    except ConfigError:
        raise
    except (pint.errors.PintError, ValueError, TypeError, AttributeError, AssertionError) as exc:
        raise ConfigError(key, value, f"a {kind} such as {_EXAMPLES[kind]!r} ({exc})", source) from exc
    return _finite(magnitude, key, kind, source)


def parse_pressure(value: object, key: str, ambient_pa: float, source: str | None = None) -> float:
    """Turn "300 bar gauge", "4350 psi abs" or "101.3 kPa a" into an absolute pressure in Pa.

    Gauge or absolute must be said: a tank pressure that is silently one or the other is off by
    one atmosphere, which near the regulator's minimum inlet pressure is the whole margin.

    Args:
        value: the text from the rig file.
        key: the rig-file key, for the error message.
        ambient_pa: absolute ambient pressure used to turn gauge into absolute, Pa.
        source: the file name, for the error message.

    Returns:
        Absolute pressure, Pa.
    """
    if not isinstance(value, str):
        raise ConfigError(key, value, "a pressure string such as '300 bar gauge' or '101.3 kPa abs'", source)
    words = value.strip().split()
    reference = words[-1].lower() if words else ""
    if reference in _GAUGE_WORDS:
        offset = ambient_pa
    elif reference in _ABSOLUTE_WORDS:
        offset = 0.0
    else:
        raise ConfigError(key, value, "a pressure that says 'gauge' or 'abs' after its unit, such as '300 bar gauge'", source)
    pressure_pa = parse_quantity(" ".join(words[:-1]), "pressure", key, source) + offset
    if pressure_pa < 0.0:
        raise ConfigError(key, value, "an absolute pressure of zero or more", source)
    return pressure_pa


def convert(value_si: float, kind: str, unit: str) -> float:
    """Express an SI value of the given kind in another unit, for display and reports.

    Raises:
        ConfigError: the unit is not one pint knows or is of another dimension.
    """
    target_unit = "degC" if kind == "temperature" and unit.strip() in {"C", "°C"} else unit
    try:
        return float(Q_(value_si, SI_UNITS[kind]).to(target_unit).magnitude)
    except (pint.errors.PintError, ValueError, TypeError, AttributeError) as exc:
        raise ConfigError("unit", unit, f"a unit of {kind} that pint knows ({exc})") from exc


def _finite(magnitude: float, key: str, kind: str, source: str | None) -> float:
    if not math.isfinite(magnitude):
        raise ConfigError(key, magnitude, f"a finite {kind}", source)
    return magnitude


_EXAMPLES: dict[str, str] = {
    "pressure": "300 bar",
    "temperature": "20 C",
    "length": "1.2 mm",
    "area": "1 mm**2",
    "volume": "2 L",
    "mass": "1.5 kg",
    "force": "10 N",
    "time": "30 s",
    "velocity": "50 m/s",
    "acceleration": "9.81 m/s**2",
    "mass_flow": "2 g/s",
    "angle": "15 deg",
    "impulse": "100 N*s",
    "energy": "1 kJ",
    "dimensionless": "0.95",
}
