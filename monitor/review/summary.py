"""The review's Summary: plain dataclasses of numbers in SI units (names carry the unit), built from the engine.

A number the engine or the log cannot give is NaN (rendered as null in JSON, "n/a" in text). `*_std` is the
standard uncertainty (k = 1, GUM) of the field of the same name.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from monitor.units import G0_M_S2

SCHEMA_VERSION = 1


@dataclass(frozen=True)
class LogInfo:
    path: str
    rig_name: str
    rig_kind: str
    started_utc: str
    start_s: float
    end_s: float
    duration_s: float
    sample_count: int
    warnings: tuple[str, ...]


@dataclass(frozen=True)
class Firing:
    burn_time_s: float  # valve open (or flow above the firing threshold), summed over the run
    pulse_count: int
    pulse_on_time_mean_s: float
    pulse_on_time_min_s: float
    pulse_on_time_max_s: float
    firing_span_s: float  # first pulse start to last pulse end
    duty_cycle: float  # burn_time_s / firing_span_s (1 for one continuous burn, 0 without pulses)


@dataclass(frozen=True)
class Thrust:
    load_cell_fitted: bool
    total_impulse_estimated_n_s: float
    total_impulse_estimated_n_s_std: float
    total_impulse_measured_n_s: float
    total_impulse_measured_n_s_std: float
    thrust_peak_estimated_n: float
    thrust_peak_measured_n: float
    thrust_mean_estimated_n: float  # total impulse over burn time
    thrust_mean_estimated_n_std: float
    thrust_mean_measured_n: float
    thrust_mean_measured_n_std: float


@dataclass(frozen=True)
class Propellant:
    initial_kg: float
    initial_kg_std: float
    used_flow_gauge_kg: float  # the flow meter's integral (the nozzle's flow where the meter was stale)
    used_flow_gauge_kg_std: float
    used_pvt_gauge_kg: float  # initial minus final PVT contents (includes any leak)
    used_pvt_gauge_kg_std: float
    remaining_flow_gauge_kg: float
    remaining_flow_gauge_kg_std: float
    remaining_pvt_gauge_kg: float
    remaining_pvt_gauge_kg_std: float
    gauge_difference_kg: float  # flow gauge minus PVT gauge at the end
    gauge_difference_kg_std: float
    leak_rate_kg_s: float
    leak_rate_kg_s_std: float
    leak_suspected: bool


@dataclass(frozen=True)
class Isp:
    isp_delivered_mean_s: float  # load-cell impulse over g0 times propellant used (NaN without a load cell)
    isp_delivered_mean_s_std: float
    isp_estimated_mean_s: float  # estimated impulse over g0 times propellant used
    isp_estimated_mean_s_std: float


@dataclass(frozen=True)
class Flight:
    dry_mass_kg: float
    delta_v_achieved_m_s: float  # Tsiolkovsky at the run's mean exhaust velocity, dry + initial propellant
    delta_v_achieved_m_s_std: float
    delta_v_left_m_s: float
    delta_v_left_m_s_std: float
    hover_endurance_left_s: float  # NaN unless the rig is a hovering platform
    hover_endurance_left_s_std: float


@dataclass(frozen=True)
class Pulse:
    index: int  # 1-based
    start_s: float
    on_time_s: float
    impulse_estimated_n_s: float
    impulse_measured_n_s: float
    propellant_kg: float
    isp_delivered_s: float  # measured impulse / (g0 propellant); NaN without a load cell
    isp_estimated_s: float
    thrust_peak_estimated_n: float
    thrust_peak_measured_n: float


@dataclass(frozen=True)
class AlertEvent:
    t_s: float
    rule: str
    severity: str
    from_state: str
    to_state: str
    cause: str
    value: float
    threshold: float
    unit: str


@dataclass(frozen=True)
class StalePeriod:
    channel: str
    start_s: float
    end_s: float
    duration_s: float


@dataclass(frozen=True)
class Link:
    lines: int
    bad_lines: dict[str, int]  # line status word -> count
    bad_line_total: int
    sequence_gaps: int  # lines the device numbered that never arrived
    link_losses: int
    link_events: dict[str, int]  # link-event kind -> count
    gap_count: int  # steps between samples longer than the engine's gap threshold
    gap_longest_s: float
    gap_total_s: float
    stale_periods: tuple[StalePeriod, ...]


@dataclass(frozen=True)
class PredictionCheck:
    predicted_thrust_n: float  # at the set point, full tank
    predicted_isp_s: float
    predicted_total_impulse_n_s: float  # over the run's burn time, continuous firing from a full tank
    total_impulse_ratio: float  # measured (load cell, else estimate) over predicted
    predicted_burn_time_s: float  # to expel the propellant used (flow gauge) at the predicted flow
    burn_time_ratio: float  # measured burn time over predicted


@dataclass(frozen=True)
class Summary:
    schema_version: int
    log: LogInfo
    firing: Firing
    thrust: Thrust
    propellant: Propellant
    isp: Isp
    flight: Flight
    pulses: tuple[Pulse, ...]
    alerts: tuple[AlertEvent, ...]
    alerts_raised: dict[str, int]  # rule -> times its condition was set
    link: Link
    prediction: PredictionCheck | None


def ratio(numerator: float, denominator: float) -> float:
    """numerator / denominator, NaN when the denominator is zero or either is NaN."""
    if not (math.isfinite(numerator) and math.isfinite(denominator)) or denominator == 0.0:
        return math.nan
    return numerator / denominator


def isp_s(impulse_n_s: float, propellant_kg: float) -> float:
    """Delivered Isp = I / (g0 m) in s (Sutton, Rocket Propulsion Elements, eq. 2-3, from memory); NaN if m <= 0."""
    return ratio(impulse_n_s, G0_M_S2 * propellant_kg) if propellant_kg > 0.0 else math.nan


def isp_std_s(impulse_n_s, impulse_std, propellant_kg, propellant_std) -> float:
    """First-order (GUM) standard uncertainty of I / (g0 m), inputs taken as uncorrelated."""
    value = isp_s(impulse_n_s, propellant_kg)
    if not math.isfinite(value):
        return math.nan
    return abs(value) * math.hypot(ratio(impulse_std, impulse_n_s) if impulse_n_s else 0.0, propellant_std / propellant_kg)


def delta_v_achieved(impulse_n_s, impulse_std, used_kg, used_std, initial_mass_kg, initial_std) -> tuple[float, float]:
    """Delta-v of the run and its std, m/s: Tsiolkovsky dv = (I/m_p) ln(m0 / (m0 - m_p)) at the run's mean
    effective exhaust velocity I/m_p (Tsiolkovsky rocket equation); m0 = dry + initial propellant, kg.
    Uncertainty: first-order GUM propagation with the three inputs uncorrelated. Zero without propellant used."""
    if not (used_kg > 0.0) or not math.isfinite(impulse_n_s) or not (initial_mass_kg > used_kg):
        return (0.0, 0.0) if used_kg == 0.0 or not (used_kg > 0.0) else (math.nan, math.nan)
    log_ratio = math.log(initial_mass_kg / (initial_mass_kg - used_kg))
    dv = impulse_n_s / used_kg * log_ratio
    d_impulse = log_ratio / used_kg
    d_used = -impulse_n_s / used_kg**2 * log_ratio + impulse_n_s / used_kg / (initial_mass_kg - used_kg)
    d_m0 = impulse_n_s / used_kg * (1.0 / initial_mass_kg - 1.0 / (initial_mass_kg - used_kg))
    std = math.sqrt(np.nansum([(d_impulse * impulse_std) ** 2, (d_used * used_std) ** 2, (d_m0 * initial_std) ** 2]))
    return dv, std
