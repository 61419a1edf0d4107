"""The rig file's optional [estimation] table: how the estimators choose u, filter, judge leaks and keep reserve.

Every key has a default, so a rig without the table works; each key is checked and a mistake is reported as
a ConfigError naming the key ("estimation.leak_window"), the value and what was expected. docs/estimates.md
documents the table.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from monitor.config import Rig, RigTable
from monitor.errors import ConfigError
from monitor.units import G0_M_S2, parse_quantity

# Sensor time constants assumed when the table gives none: a sheathed thermocouple in a gas stream (a few
# seconds) and a thermal mass-flow meter (a few tenths of a second); common practice, no source.
DEFAULT_TEMPERATURE_LAG_S = 2.0
DEFAULT_MASS_FLOW_LAG_S = 0.3


@dataclass(frozen=True)
class EstimationSettings:
    """Checked [estimation] settings, SI units.

    Attributes:
        exhaust_velocity_m_s: a configured effective exhaust velocity, or None for "nozzle" (ideal nozzle
            at the measured feed state, pressure term at the rig's ambient pressure).
        exhaust_velocity_std_m_s: standard uncertainty of the configured value (0 with "nozzle").
        filter_cutoff_hz: -3 dB frequency of the 2nd-order Butterworth low-pass on flow, thrust, feed pressure.
        sample_rate_hz: the samples' rate if known, else None: measured from the first samples.
        block_s: length of the blocks whose means feed the slow estimates (PVT gauge, usable mass, leak fit).
        projection_interval_s: how often the projections' uncertainties are propagated (their values are
            computed every block).
        leak_window_s: span of the straight-line fit behind the leak rate.
        leak_threshold_kg_s: smallest leak rate worth suspecting.
        leak_coverage: k in "leak rate > k u(leak rate)".
        reserve_kg / reserve_fraction: propellant held back from usable_propellant_kg, as a mass, or as a
            fraction of the usable mass at the first good tank state (at most one is non-zero).
        firing_flow_fraction: with no valve channel, the flow above which the rig counts as firing, as a
            fraction of the nozzle's flow at the regulator set point.
        temperature_lag_s, mass_flow_lag_s: first-order time constants of the tank thermometer and the
            flow meter (they widen the leak rate's uncertainty while those signals change).
        tank_volume_std_m3, dry_mass_std_kg, discharge_coefficient_std: standard uncertainties of the rig
            file's tank volume, dry mass and nozzle discharge coefficient.
    """

    exhaust_velocity_m_s: float | None = None
    exhaust_velocity_std_m_s: float = 0.0
    filter_cutoff_hz: float = 10.0
    sample_rate_hz: float | None = None
    block_s: float = 0.02
    projection_interval_s: float = 0.5
    leak_window_s: float = 10.0
    leak_threshold_kg_s: float = 2.0e-5
    leak_coverage: float = 3.0
    reserve_kg: float = 0.0
    reserve_fraction: float = 0.0
    firing_flow_fraction: float = 0.2
    temperature_lag_s: float = DEFAULT_TEMPERATURE_LAG_S
    mass_flow_lag_s: float = DEFAULT_MASS_FLOW_LAG_S
    tank_volume_std_m3: float = 0.0
    dry_mass_std_kg: float = 0.0
    discharge_coefficient_std: float = 0.0


def _rate_hz(t: RigTable, name: str, default: Any) -> float | None:
    """A rate such as "10 Hz" in 1/s (read through its period), or default when absent."""
    value = t.raw(name, default)
    if value is None:
        return None
    if not isinstance(value, str):
        raise t.fail(name, "a rate with its unit, such as '10 Hz'")
    try:
        period_s = parse_quantity(f"1 / ({value})", "time", t.key(name), t.source)
    except ConfigError:
        raise t.fail(name, "a rate with its unit, such as '10 Hz'") from None
    if not (period_s > 0.0 and math.isfinite(period_s)):
        raise t.fail(name, "a positive rate")
    return 1.0 / period_s


def _at_least(t: RigTable, name: str, kind: str, default: str, low: float = 0.0, strict: bool = False) -> float:
    value = t.quantity(name, kind, default, positive=False)
    if value < low or (strict and value == low):
        raise t.fail(name, f"a {kind} {'above' if strict else 'of at least'} {low:g} (SI)")
    return value


def _exhaust_velocity(t: RigTable) -> tuple[float | None, float]:
    if "isp" in t.data and "exhaust_velocity" in t.data:
        raise t.fail("isp", "either isp or exhaust_velocity, not both")
    if "isp" in t.data:
        isp_s = _at_least(t, "isp", "time", "0 s", strict=True)
        if "isp_uncertainty" not in t.data:
            raise t.fail("isp_uncertainty", "the standard uncertainty of the configured isp, such as '1 s'")
        return isp_s * G0_M_S2, _at_least(t, "isp_uncertainty", "time", "0 s") * G0_M_S2
    value = t.raw("exhaust_velocity", "nozzle")
    if value == "nozzle":
        return None, 0.0
    if not isinstance(value, str):
        raise t.fail("exhaust_velocity", "'nozzle' or a velocity such as '540 m/s'")
    u_m_s = _at_least(t, "exhaust_velocity", "velocity", "0 m/s", strict=True)
    if "exhaust_velocity_uncertainty" not in t.data:
        raise t.fail(
            "exhaust_velocity_uncertainty", "the standard uncertainty of the configured exhaust velocity, such as '10 m/s'"
        )
    return u_m_s, _at_least(t, "exhaust_velocity_uncertainty", "velocity", "0 m/s")


def _reserve(t: RigTable) -> tuple[float, float]:
    value = t.raw("reserve", "0 g")
    if isinstance(value, str) and value.strip().endswith("%"):
        try:
            fraction = float(value.strip()[:-1]) / 100.0
        except ValueError:
            raise t.fail("reserve", "a mass such as '5 g' or a percentage such as '10 %'") from None
        if not 0.0 <= fraction < 1.0:
            raise t.fail("reserve", "a percentage from 0 % to below 100 %")
        return 0.0, fraction
    return _at_least(t, "reserve", "mass", "0 g"), 0.0


def parse_estimation(rig: Rig) -> EstimationSettings:
    """Check the rig's [estimation] table (rig.estimation, raw) and return its settings.

    Raises:
        ConfigError: an unknown key, a value of the wrong kind or out of range, or a configured exhaust
            velocity (or isp) without its uncertainty.
    """
    t = RigTable(rig.estimation, "estimation", rig.source_path)
    u, u_std = _exhaust_velocity(t)
    t.raw("isp_uncertainty", None)
    t.raw("exhaust_velocity_uncertainty", None)
    if u is None and ("isp_uncertainty" in t.data or "exhaust_velocity_uncertainty" in t.data):
        name = "isp_uncertainty" if "isp_uncertainty" in t.data else "exhaust_velocity_uncertainty"
        raise t.fail(name, "no uncertainty key with exhaust_velocity = 'nozzle' (the nozzle model's comes from the sensors)")
    reserve_kg, reserve_fraction = _reserve(t)
    settings = EstimationSettings(
        exhaust_velocity_m_s=u,
        exhaust_velocity_std_m_s=u_std,
        filter_cutoff_hz=_rate_hz(t, "filter_cutoff", "10 Hz"),
        sample_rate_hz=_rate_hz(t, "sample_rate", None),
        block_s=_at_least(t, "block", "time", "20 ms", strict=True),
        projection_interval_s=_at_least(t, "projection_interval", "time", "0.5 s", strict=True),
        leak_window_s=_at_least(t, "leak_window", "time", "10 s", strict=True),
        leak_threshold_kg_s=_at_least(t, "leak_threshold", "mass_flow", "0.02 g/s"),
        leak_coverage=t.number("leak_coverage", 3.0, low=0.0, high=10.0),
        reserve_kg=reserve_kg,
        reserve_fraction=reserve_fraction,
        firing_flow_fraction=t.number("firing_flow_fraction", 0.2, low=0.0, high=1.0),
        temperature_lag_s=_at_least(t, "temperature_lag", "time", f"{DEFAULT_TEMPERATURE_LAG_S} s"),
        mass_flow_lag_s=_at_least(t, "mass_flow_lag", "time", f"{DEFAULT_MASS_FLOW_LAG_S} s"),
        tank_volume_std_m3=_at_least(t, "tank_volume_uncertainty", "volume", "0 L"),
        dry_mass_std_kg=_at_least(t, "dry_mass_uncertainty", "mass", "0 kg"),
        discharge_coefficient_std=t.number("discharge_coefficient_uncertainty", 0.0, low=0.0, high=0.5),
    )
    if settings.leak_window_s < 5.0 * settings.block_s:
        raise t.fail("leak_window", f"at least five blocks ({5.0 * settings.block_s:g} s)")
    t.finish()
    return settings
