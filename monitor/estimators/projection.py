"""What the propellant left will still buy: usable mass, regulator headroom, delta-v and hover endurance.

From the current tank state (block means of tank pressure and temperature):
* usable mass: what can leave before the tank falls to the regulator's minimum inlet pressure along the
  rig's expansion path (TankPath.mass_at_pressure_kg, tabulated per unit volume), less the reserve;
* the regulator's outlet state for that tank state (FeedSystem.outlet_pressure_pa; isenthalpic throttle), the
  nozzle's flow and effective exhaust velocity there (or the configured exhaust velocity);
* delta-v left, Tsiolkovsky dv = u ln(m0/mf) with m0 = dry mass + PVT contents and mf = m0 - usable
  (monitor.physics.rocket.delta_v_m_s);
* hover endurance left, t = (u/g0) ln(m0/mf) (monitor.physics.rocket.hover_endurance_s), 0 when the thrust
  at the set point is below the vehicle's weight.
The exhaust velocity is the one at the current state; as the tank cools along its path it falls, so the
projection is slightly optimistic late in a blowdown. Uncertainties: GUM first-order propagation
(monitor.physics.uncertainty.propagate) of the tank sensors, tank volume, dry mass and exhaust velocity.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from monitor.estimators.tables import GasTables, Grid2D
from monitor.estimators.thrust import NozzleModel
from monitor.physics import rocket
from monitor.physics.tank import FeedSystem
from monitor.physics.uncertainty import Measured, propagate
from monitor.units import G0_M_S2


@dataclass(frozen=True, eq=False)
class Projection:
    """The rig's constants for projections; call outlet() and project() on arrays of finite block means."""

    gas: GasTables
    usable_per_volume: Grid2D  # kg/m^3 above the minimum inlet pressure
    nozzle: NozzleModel
    feed: FeedSystem
    volume_m3: float
    volume_std_m3: float
    dry_mass_kg: float
    dry_mass_std_kg: float
    hover: bool
    configured_u: tuple[float, float] | None

    @property
    def names(self) -> tuple[str, ...]:
        """The projections values() and project() give, in order."""
        return ("usable_propellant_kg", "delta_v_left_m_s") + (("hover_endurance_left_s",) if self.hover else ())

    def outlet(self, tank_p_pa, tank_t_k, tank_t_std_k) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(outlet temperature K, flow kg/s, exhaust velocity m/s, its std m/s) at the regulator's outlet."""
        outlet_pa = self.feed.outlet_pressure_pa(tank_p_pa)
        enthalpy = self.gas.enthalpy_j_kg(tank_p_pa, tank_t_k)
        outlet_k = self.gas.throttled_temperature_k(enthalpy, np.minimum(outlet_pa, tank_p_pa), tank_t_k)
        gamma = self.gas.gamma(outlet_pa, outlet_k)
        flowing = outlet_pa > self.feed.ambient_pressure_pa
        ideal, _ = self.nozzle.ideal_flow_kg_s(outlet_pa, outlet_k, gamma)
        flow = np.where(flowing, ideal * self.nozzle.discharge_coefficient, 0.0)
        if self.configured_u is not None:
            u = np.full(np.shape(outlet_pa), self.configured_u[0])
            return outlet_k, flow, u, np.full(u.shape, self.configured_u[1])
        u, _ = self.nozzle.exhaust_velocity_m_s(outlet_pa, outlet_k, gamma)
        u = np.where(flowing, u, 0.0)
        return outlet_k, flow, u, u * 0.5 * tank_t_std_k / tank_t_k

    def usable_kg(self, p, t, v, reserve_kg: float) -> np.ndarray:
        """max(V U(p, T) - reserve, 0), kg; 0 at or below the minimum inlet pressure."""
        low = self.usable_per_volume.x[0]
        per_volume = np.where(p <= low, 0.0, self.usable_per_volume(np.maximum(p, low), t))
        return np.maximum(v * per_volume - reserve_kg, 0.0)

    def _functions(self, reserve_kg: float, flow_kg_s: np.ndarray) -> dict[str, Callable[..., np.ndarray]]:
        """name -> f(p, t, v, dry, u) of each projection, vectorised element by element."""

        def masses(p, t, v, dry):
            m0 = dry + v * self.gas.density_kg_m3(p, t)
            return m0, m0 - self.usable_kg(p, t, v, reserve_kg)

        def usable(p, t, v, dry, u):
            return self.usable_kg(p, t, v, reserve_kg)

        def delta_v(p, t, v, dry, u):
            m0, mf = masses(p, t, v, dry)
            out = np.zeros(np.shape(m0))
            ok = (m0 > mf) & (u > 0.0)
            out[ok] = rocket.delta_v_m_s(u[ok], m0[ok], mf[ok])
            return out

        def hover(p, t, v, dry, u):
            m0, mf = masses(p, t, v, dry)
            out = np.zeros(np.shape(m0))
            ok = (m0 > mf) & (u > 0.0) & (flow_kg_s * u >= m0 * G0_M_S2)
            out[ok] = rocket.hover_endurance_s(u[ok], m0[ok], mf[ok])
            return out

        functions = {"usable_propellant_kg": usable, "delta_v_left_m_s": delta_v}
        if self.hover:
            functions["hover_endurance_left_s"] = hover
        return functions

    def values(self, p, t, reserve_kg: float, flow_kg_s: np.ndarray, u: np.ndarray) -> dict[str, np.ndarray]:
        """Usable propellant (kg), delta-v left (m/s) and, for hover platforms, hover endurance left (s).

        Args:
            p, t: tank pressure (Pa absolute) and temperature (K), finite arrays of one shape.
            reserve_kg: propellant held back, kg.
            flow_kg_s: the nozzles' flow at the regulator's outlet (for the hover's thrust-to-weight check).
            u: effective exhaust velocity at the outlet, m/s.
        """
        functions = self._functions(reserve_kg, flow_kg_s)
        return {name: f(p, t, self.volume_m3, self.dry_mass_kg, u) for name, f in functions.items()}

    def project(self, p: Measured, t: Measured, reserve_kg: float, flow_kg_s: np.ndarray, u: Measured
                ) -> dict[str, Measured]:
        """The same as values(), with GUM uncertainties from the tank sensors, volume, dry mass and u (propagate)."""
        inputs = {"p": p, "t": t, "v": Measured(self.volume_m3, self.volume_std_m3),
                  "dry": Measured(self.dry_mass_kg, self.dry_mass_std_kg), "u": u}
        shape = np.shape(p.value)
        inputs = {k: Measured(np.broadcast_to(m.value, shape), np.broadcast_to(m.std_uncertainty, shape))
                  for k, m in inputs.items()}
        return {name: propagate(f, inputs) for name, f in self._functions(reserve_kg, flow_kg_s).items()}
