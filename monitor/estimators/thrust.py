"""Per-sample nozzle flow, exhaust velocity, thrust, delivered Isp and discharge coefficient, with GUM uncertainties.

Formulas (every velocity and flow of the ideal nozzle comes from monitor.physics.nozzle through the tables of
monitor.estimators.tables):

* nozzle flow: choked, mdot = Cd At p0 sqrt(g/(R T0)) (2/(g+1))^((g+1)/(2(g-1))) (choked_mass_flow_kg_s;
  Sutton & Biblarz ch. 3); unchoked (valve opening or closing), the tabulated flow of nozzle_performance;
* effective exhaust velocity u = sqrt(R T0) phi(pa/p0, g), the nozzle's F / mdot with the pressure term at the
  rig's ambient pressure; or a configured value;
* estimated thrust F = mdot u with mdot the measured (filtered) flow (Sutton & Biblarz ch. 2);
* delivered Isp = F_measured / (mdot g0); thrust ratio = F_measured / F_estimated;
* apparent discharge coefficient = mdot_measured / mdot_ideal, the ideal flow being the nozzle flow above with
  Cd = 1: the Cd the flow meter says the nozzle has, to compare with the rig file's.

Uncertainties are the GUM first-order law (JCGM 100:2008 eq. 10) with analytic sensitivities, independent
inputs: a product of powers adds relative uncertainties in quadrature (GUM 5.1.6).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from monitor.estimators.tables import GasTables, NozzleTables
from monitor.physics.nozzle import choked_mass_flow_kg_s
from monitor.units import G0_M_S2


def _ratio(numerator, denominator) -> np.ndarray:
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.asarray(numerator / denominator, dtype=float)


@dataclass(frozen=True, eq=False)
class NozzleModel:
    """The rig's nozzle(s) at a measured feed state; throat area summed over all nozzles."""

    gas: GasTables
    tables: NozzleTables
    throat_area_m2: float
    discharge_coefficient: float
    ambient_pressure_pa: float
    discharge_coefficient_std: float = 0.0

    def ratio_gamma(self, feed_pressure_pa, gamma) -> tuple[np.ndarray, np.ndarray]:
        """(pa/p0 clipped to [0, 1], NaN without a positive p0; gamma clipped to the tables' range)."""
        g = self.tables.velocity.y
        gamma = np.clip(gamma, g[0], g[-1])
        with np.errstate(invalid="ignore", divide="ignore"):
            r = np.clip(self.ambient_pressure_pa / feed_pressure_pa, 0.0, 1.0)
        return np.where(feed_pressure_pa > 0.0, r, np.nan), gamma

    def ideal_flow_kg_s(self, feed_pressure_pa, feed_temperature_k, gamma) -> tuple[np.ndarray, np.ndarray]:
        """Flow with Cd = 1 (kg/s) and its sensitivity to ln p0, d mdot / d ln p0 (kg/s); NaN where inputs are."""
        p0, t0 = np.asarray(feed_pressure_pa, float), np.asarray(feed_temperature_k, float)
        r, g = self.ratio_gamma(p0, gamma)
        with np.errstate(invalid="ignore", divide="ignore"):
            scale = p0 * (self.throat_area_m2 / self.discharge_coefficient) / np.sqrt(
                self.gas.gas_constant_j_kg_k * t0)
        psi, psi_r, _ = self.tables.flow.evaluate(r, g)
        flow = scale * psi
        sensitivity = flow - scale * r * psi_r  # psi depends on p0 through pa/p0
        choked = self.tables.choked(r, g) & np.isfinite(scale) & (t0 > 0.0) & np.isfinite(g)
        if choked.any():
            flow[choked] = choked_mass_flow_kg_s(p0[choked], t0[choked], self.throat_area_m2, g[choked],
                                                 self.gas.gas_constant_j_kg_k)
            sensitivity[choked] = flow[choked]
        return flow, sensitivity

    def exhaust_velocity_m_s(self, feed_pressure_pa, feed_temperature_k, gamma) -> tuple[np.ndarray, np.ndarray]:
        """Effective exhaust velocity (m/s) and du / d ln p0 (m/s), the pressure term's share."""
        r, g = self.ratio_gamma(np.asarray(feed_pressure_pa, float), gamma)
        with np.errstate(invalid="ignore"):
            scale = np.sqrt(self.gas.gas_constant_j_kg_k * np.asarray(feed_temperature_k, float))
        phi, phi_r, _ = self.tables.velocity.evaluate(r, g)
        return scale * phi, -scale * r * phi_r


@dataclass
class ThrustSignals:
    """Per-sample results of thrust_signals, SI; *_std are standard uncertainties (k = 1)."""

    mass_flow_nozzle_kg_s: np.ndarray
    mass_flow_nozzle_kg_s_std: np.ndarray
    exhaust_velocity_m_s: np.ndarray
    exhaust_velocity_m_s_std: np.ndarray
    thrust_estimated_n: np.ndarray
    thrust_estimated_n_std: np.ndarray
    isp_delivered_s: np.ndarray
    isp_delivered_s_std: np.ndarray
    thrust_ratio: np.ndarray
    thrust_ratio_std: np.ndarray
    discharge_coefficient_apparent: np.ndarray
    discharge_coefficient_apparent_std: np.ndarray


def thrust_signals(model: NozzleModel, configured_u: tuple[float, float] | None, feed_p, feed_p_std, feed_t,
                   feed_t_std, gamma, flow, flow_std, thrust, thrust_std, firing, min_flow_kg_s: float
                   ) -> ThrustSignals:
    """The thrust-side estimates of one batch (arrays of one length; NaN where unknown).

    Args:
        model: the nozzle.
        configured_u: (u, u std) in m/s from [estimation], or None for the nozzle model.
        feed_p, feed_p_std: filtered feed pressure and its uncertainty, Pa absolute.
        feed_t, feed_t_std: feed stagnation temperature and its uncertainty, K.
        gamma: cp/cv at the feed state.
        flow, flow_std: filtered measured mass flow and its uncertainty, kg/s.
        thrust, thrust_std: filtered measured thrust and its uncertainty, N (NaN without a load cell).
        firing: bool, the rig is firing.
        min_flow_kg_s: Isp, thrust ratio and apparent Cd are NaN unless firing with more flow than this
            (and, for Cd, an ideal nozzle flow above it): near zero flow they mean nothing.
    """
    ideal, ideal_sens = model.ideal_flow_kg_s(feed_p, feed_t, gamma)
    rel_p, rel_t = _ratio(feed_p_std, feed_p), _ratio(feed_t_std, feed_t)
    cd = model.discharge_coefficient
    ideal_std = np.hypot(ideal_sens * rel_p, 0.5 * ideal * rel_t)  # mdot ~ p0 psi(pa/p0) / sqrt(T0)
    nozzle_flow = cd * ideal
    if configured_u is None:
        u, u_sens = model.exhaust_velocity_m_s(feed_p, feed_t, gamma)
        u_std = np.hypot(u_sens * rel_p, 0.5 * u * rel_t)  # u ~ sqrt(T0) phi(pa/p0)
    else:
        u = np.full(np.shape(feed_p), configured_u[0])
        u_std = np.full(np.shape(feed_p), configured_u[1])
    estimated = flow * u
    estimated_std = np.hypot(u * flow_std, flow * u_std)
    with np.errstate(invalid="ignore"):
        active = firing & (flow > min_flow_kg_s)
        flowing = active & (ideal > min_flow_kg_s)
    isp = np.where(active, _ratio(thrust, flow * G0_M_S2), np.nan)
    isp_std = np.hypot(_ratio(thrust_std, flow * G0_M_S2), isp * _ratio(flow_std, flow))
    ratio = np.where(active, _ratio(thrust, estimated), np.nan)
    ratio_std = np.hypot(_ratio(thrust_std, estimated), ratio * _ratio(estimated_std, estimated))
    apparent = np.where(flowing, _ratio(flow, ideal), np.nan)
    apparent_std = np.hypot(_ratio(flow_std, ideal), apparent * _ratio(ideal_std, ideal))
    return ThrustSignals(
        mass_flow_nozzle_kg_s=nozzle_flow,
        mass_flow_nozzle_kg_s_std=np.hypot(cd * ideal_std, ideal * model.discharge_coefficient_std),
        exhaust_velocity_m_s=u,
        exhaust_velocity_m_s_std=u_std,
        thrust_estimated_n=estimated,
        thrust_estimated_n_std=estimated_std,
        isp_delivered_s=isp,
        isp_delivered_s_std=isp_std,
        thrust_ratio=ratio,
        thrust_ratio_std=ratio_std,
        discharge_coefficient_apparent=apparent,
        discharge_coefficient_apparent_std=apparent_std,
    )
