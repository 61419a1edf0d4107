"""The estimates at one moment, for the screen and the report: EstimateState, built from the newest sample."""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numpy as np

# Every per-sample estimate the Estimator puts in Signals (docs/estimates.md says what each one means).
ESTIMATES: tuple[str, ...] = (
    "thrust_estimated_n", "thrust_measured_n", "isp_delivered_s", "thrust_ratio", "mass_flow_filtered_kg_s",
    "mass_flow_nozzle_kg_s", "exhaust_velocity_m_s", "discharge_coefficient_apparent", "nozzle_feed_temperature_k",
    "propellant_flow_gauge_kg", "propellant_pvt_gauge_kg", "gauge_difference_kg", "leak_rate_kg_s",
    "leak_suspected", "initial_propellant_kg", "usable_propellant_kg", "usable_propellant_fraction",
    "regulator_headroom_pa", "time_left_s", "projection_exhaust_velocity_m_s", "delta_v_left_m_s",
    "delta_v_left_conservative_m_s", "hover_endurance_left_s", "hover_endurance_left_conservative_s",
    "total_impulse_n_s", "total_impulse_estimated_n_s", "propellant_used_kg", "burn_time_s", "mean_isp_s",
    "firing", "pulse_count",
)
# Estimates whose standard uncertainty the Estimator gives (Signals.std and the *_std fields below).
WITH_STD: tuple[str, ...] = (
    "thrust_estimated_n", "thrust_measured_n", "isp_delivered_s", "thrust_ratio", "mass_flow_filtered_kg_s",
    "mass_flow_nozzle_kg_s", "exhaust_velocity_m_s", "discharge_coefficient_apparent", "nozzle_feed_temperature_k",
    "propellant_flow_gauge_kg", "propellant_pvt_gauge_kg", "gauge_difference_kg", "leak_rate_kg_s",
    "initial_propellant_kg", "usable_propellant_kg", "usable_propellant_fraction", "regulator_headroom_pa",
    "time_left_s", "projection_exhaust_velocity_m_s", "delta_v_left_m_s", "hover_endurance_left_s",
    "total_impulse_n_s", "total_impulse_estimated_n_s", "propellant_used_kg", "mean_isp_s",
)


@dataclass(frozen=True)
class EstimateState:
    """Latest estimates and their standard uncertainties (k = 1), SI units; NaN where not known yet.

    Field X is the newest sample of the signal X; X_std is its standard uncertainty. A conservative bound
    is value - 2 std. leak_suspected and pulse_count are plain; usable_propellant_percent is 100 times the
    fraction.
    """

    t_s: float = math.nan
    thrust_estimated_n: float = math.nan
    thrust_estimated_n_std: float = math.nan
    thrust_measured_n: float = math.nan
    thrust_measured_n_std: float = math.nan
    thrust_ratio: float = math.nan
    thrust_ratio_std: float = math.nan
    isp_delivered_s: float = math.nan
    isp_delivered_s_std: float = math.nan
    mass_flow_filtered_kg_s: float = math.nan
    mass_flow_filtered_kg_s_std: float = math.nan
    mass_flow_nozzle_kg_s: float = math.nan
    mass_flow_nozzle_kg_s_std: float = math.nan
    exhaust_velocity_m_s: float = math.nan
    exhaust_velocity_m_s_std: float = math.nan
    discharge_coefficient_apparent: float = math.nan
    discharge_coefficient_apparent_std: float = math.nan
    nozzle_feed_temperature_k: float = math.nan
    nozzle_feed_temperature_k_std: float = math.nan
    propellant_flow_gauge_kg: float = math.nan
    propellant_flow_gauge_kg_std: float = math.nan
    propellant_pvt_gauge_kg: float = math.nan
    propellant_pvt_gauge_kg_std: float = math.nan
    gauge_difference_kg: float = math.nan
    gauge_difference_kg_std: float = math.nan
    leak_suspected: bool = False
    leak_rate_kg_s: float = math.nan
    leak_rate_kg_s_std: float = math.nan
    initial_propellant_kg: float = math.nan
    initial_propellant_kg_std: float = math.nan
    usable_propellant_kg: float = math.nan
    usable_propellant_kg_std: float = math.nan
    usable_propellant_fraction: float = math.nan
    usable_propellant_fraction_std: float = math.nan
    usable_propellant_percent: float = math.nan
    usable_propellant_percent_std: float = math.nan
    regulator_headroom_pa: float = math.nan
    regulator_headroom_pa_std: float = math.nan
    time_left_s: float = math.nan
    time_left_s_std: float = math.nan
    projection_exhaust_velocity_m_s: float = math.nan
    projection_exhaust_velocity_m_s_std: float = math.nan
    delta_v_left_m_s: float = math.nan
    delta_v_left_m_s_std: float = math.nan
    delta_v_left_conservative_m_s: float = math.nan
    hover_endurance_left_s: float = math.nan
    hover_endurance_left_s_std: float = math.nan
    hover_endurance_left_conservative_s: float = math.nan
    total_impulse_n_s: float = math.nan
    total_impulse_n_s_std: float = math.nan
    total_impulse_estimated_n_s: float = math.nan
    total_impulse_estimated_n_s_std: float = math.nan
    propellant_used_kg: float = math.nan
    propellant_used_kg_std: float = math.nan
    burn_time_s: float = 0.0
    mean_isp_s: float = math.nan
    mean_isp_s_std: float = math.nan
    firing: bool = False
    pulse_count: int = 0

    @classmethod
    def from_last(cls, t_s: float, values: dict[str, np.ndarray], std: dict[str, np.ndarray]) -> "EstimateState":
        """The state at the last sample of per-sample arrays (Estimator.update's values and std)."""
        out: dict[str, object] = {"t_s": float(t_s)}
        for f in fields(cls):
            name = f.name
            if name in values:
                out[name] = float(values[name][-1])
            elif name.endswith("_std") and name[:-4] in std:
                out[name] = float(std[name[:-4]][-1])
        out["leak_suspected"] = bool(out.get("leak_suspected", 0.0) == 1.0)
        out["firing"] = bool(out.get("firing", 0.0) == 1.0)
        out["pulse_count"] = int(out.get("pulse_count", 0.0))
        out["usable_propellant_percent"] = 100.0 * float(out.get("usable_propellant_fraction", math.nan))
        out["usable_propellant_percent_std"] = 100.0 * float(out.get("usable_propellant_fraction_std", math.nan))
        return cls(**out)  # type: ignore[arg-type]
