"""The slow half of the Estimator: the rig's physics tables, and the estimates made once per block of samples.

Each closed block (settings.block_s of samples) gives the means of tank pressure, tank temperature, feed
pressure (and temperature) and flow; from them: the PVT gauge, the nozzle feed temperature by isenthalpic
throttling from the tank, usable propellant, projections, the gauge difference and the leak fit. The gauges'
uncertainties use analytic sensitivity coefficients (GUM eq. 10 and 16); the projections' come from
monitor.physics.uncertainty.propagate once per projection_interval.
"""

from __future__ import annotations

import numpy as np

from monitor.calibration import ChannelSpec, std_uncertainty
from monitor.config import Rig
from monitor.estimators.projection import Projection
from monitor.estimators.propellant import LeakDetector, WindowFits, density_sensitivities, gauge_difference_kg, pvt_gauge_kg
from monitor.estimators.settings import EstimationSettings
from monitor.estimators.tables import gas_tables, nozzle_tables, usable_density_table
from monitor.estimators.thrust import NozzleModel
from monitor.physics.gas import cacheable
from monitor.physics.uncertainty import Measured
from monitor.predict import feed_system

# Property grids: pressure from half the ambient pressure to above the highest the tank may see, temperature
# from TEMPERATURE_BELOW_K under the coldest of fill and ambient (a blowdown and the regulator's throttle cool
# the gas) to TEMPERATURE_ABOVE_K over the warmest.
PRESSURE_POINTS, TEMPERATURE_POINTS, GAMMA_POINTS = 241, 116, 25
TEMPERATURE_BELOW_K, TEMPERATURE_ABOVE_K, PRESSURE_MARGIN = 150.0, 80.0, 1.05
# Relative standard uncertainty of a sensor-lag correction: datasheet time constants are rough and change
# with the flow around the sensor (an assumption, no source).
LAG_RELATIVE_STD = 0.5


class RigPhysics:
    """The rig's constants, property tables, nozzle model and projection, built once per Estimator."""

    def __init__(self, rig: Rig, settings: EstimationSettings, specs: dict[str, ChannelSpec]):
        with cacheable():  # the rig's setup: kept between runs when a store is installed (monitor.gas_memo)
            self._build(rig, settings, specs)

    def _build(self, rig: Rig, settings: EstimationSettings, specs: dict[str, ChannelSpec]) -> None:
        self.specs, self.settings = specs, settings
        tank = rig.tank
        high = max(tank.meop_pa, tank.fill_pressure_pa)
        if "tank_pressure" in specs and np.isfinite(specs["tank_pressure"].valid_range_si[1]):
            high = max(high, specs["tank_pressure"].valid_range_si[1])
        p_grid = (0.5 * rig.ambient_pressure_pa, PRESSURE_MARGIN * high, PRESSURE_POINTS)
        cold = min(tank.fill_temperature_k, rig.ambient_temperature_k)
        warm = max(tank.fill_temperature_k, rig.ambient_temperature_k)
        t_grid = (max(cold - TEMPERATURE_BELOW_K, 0.3 * cold), warm + TEMPERATURE_ABOVE_K, TEMPERATURE_POINTS)
        self.gas = gas_tables(rig.gas, rig.gas_model, p_grid, t_grid)
        self.feed = feed_system(rig)
        self.min_inlet_pressure_pa = rig.regulator.min_inlet_pressure_pa
        usable = usable_density_table(rig.gas, rig.gas_model, tank.expansion, tank.polytropic_exponent,
                                      self.min_inlet_pressure_pa, (p_grid[1], PRESSURE_POINTS), t_grid)
        low_p = self.gas.gamma.x <= min(p_grid[1], 3.0 * rig.regulator.set_pressure_pa)
        gammas = self.gas.gamma.z[low_p]
        n = rig.nozzle
        tables = nozzle_tables(n.exit_area_m2 / n.throat_area_m2, n.discharge_coefficient,
                               n.divergence_half_angle_rad, n.thrust_efficiency,
                               (float(np.nanmin(gammas)), float(np.nanmax(gammas)), GAMMA_POINTS))
        self.nozzle = NozzleModel(self.gas, tables, n.throat_area_m2 * n.count, n.discharge_coefficient,
                                  rig.ambient_pressure_pa, settings.discharge_coefficient_std)
        u = settings.exhaust_velocity_m_s
        self.configured_u = None if u is None else (u, settings.exhaust_velocity_std_m_s)
        self.volume_m3, self.volume_std_m3 = tank.volume_m3, settings.tank_volume_std_m3
        self.projection = Projection(self.gas, usable, self.nozzle, self.feed, tank.volume_m3,
                                     settings.tank_volume_std_m3, rig.vehicle.dry_mass_kg, settings.dry_mass_std_kg,
                                     rig.kind == "hover_platform", self.configured_u)
        set_flow = self.projection.outlet(np.array([tank.fill_pressure_pa]), np.array([tank.fill_temperature_k]),
                                          np.zeros(1))[1][0]
        self.firing_flow_kg_s = settings.firing_flow_fraction * float(set_flow)

    def has_accuracy(self, role: str) -> bool:
        return role in self.specs and self.specs[role].accuracy is not None

    def std(self, role: str, values: np.ndarray, spec: ChannelSpec | None = None) -> np.ndarray:
        """Standard uncertainty of a role's (or a given channel's) values from its accuracy; NaN if unknown."""
        spec = spec if spec is not None else self.specs.get(role)
        if spec is None or spec.accuracy is None:
            return np.full(np.shape(values), np.nan)
        return std_uncertainty(spec, values)


class SlowEstimates:
    """Block-rate estimates with the state they carry: first good contents, reserve, fits, last values."""

    def __init__(self, physics: RigPhysics, temperature_fit: WindowFits, leak: LeakDetector):
        self.physics, self.temperature_fit, self.leak = physics, temperature_fit, leak
        self.last: dict[str, float] = {}
        self.start: dict[str, float] | None = None  # the first good block: contents, sensors, flow integral
        self.start_block: int | None = None  # its index among the current batch's closed blocks
        self.reserve_kg = 0.0
        self.usable_start_kg = np.nan
        self.carried: dict[str, float] = {}  # outlet state and relative uncertainties at the last tick
        self.last_tick = -np.inf
        self._tank: dict[str, np.ndarray] = {}

    def ffill(self, name: str, block_values: np.ndarray, closed: np.ndarray) -> np.ndarray:
        """Per sample, the value of the newest block closed at or before it (the carried one before any)."""
        series = np.concatenate([[self.last.get(name, np.nan)], block_values])
        if block_values.size:
            self.last[name] = float(block_values[-1])
        return series[closed]

    def _begin(self, p, temp, up, ut, pvt, pvt_std, valid) -> None:
        """Remember the first good block: contents, sensor readings and the reserve it implies."""
        ph, s = self.physics, self.physics.settings
        j = int(valid.argmax())
        self.start_block = j
        self.start = {"m0": pvt[j], "m0_std": pvt_std[j], "p": p[j], "t": temp[j], "up": up[j], "ut": ut[j]}
        usable = float(ph.projection.usable_kg(p[j], temp[j], ph.volume_m3, 0.0))
        self.reserve_kg = s.reserve_kg + s.reserve_fraction * usable
        self.usable_start_kg = max(usable - self.reserve_kg, 0.0)

    def _carry(self, name: str, due: np.ndarray, due_values: np.ndarray) -> np.ndarray:
        """Per block, the value computed at the newest due block at or before it (the carried one before any)."""
        series = np.concatenate([[self.carried.get(name, np.nan)], due_values])
        index = np.cumsum(due)
        if due_values.size:
            self.carried[name] = float(due_values[-1])
        return series[index]

    def _projections(self, slot, p, temp, up, ut, valid, values, std) -> None:
        """Usable propellant, delta-v and hover endurance per block. The regulator outlet's state (exhaust
        velocity, flow) and the projections' uncertainties (propagate) are computed at the first good block of
        each projection_interval only and carried to the blocks after it (the uncertainties as relative)."""
        ph = self.physics
        for name in ("usable_propellant_kg", "delta_v_left_m_s", "hover_endurance_left_s"):
            values[name], std[name] = np.full(p.shape, np.nan), np.full(p.shape, np.nan)
        tick = slot // max(1, int(round(ph.settings.projection_interval_s / ph.settings.block_s)))
        before = np.maximum.accumulate(np.concatenate([[self.last_tick], np.where(valid, tick, -np.inf)]))[:-1]
        due = valid & (tick > before)
        outlet = ph.projection.outlet(p[due], temp[due], ut[due]) if due.any() else (np.empty(0),) * 4
        if due.any():
            self.last_tick = float(tick[due][-1])
        set_flow, u, u_std = (self._carry(name, due, x) for name, x in zip(("flow", "u", "u_std"), outlet[1:]))
        values["set_point_flow_kg_s"] = set_flow
        values["projection_exhaust_velocity_m_s"], std["projection_exhaust_velocity_m_s"] = u, u_std
        ok = valid & np.isfinite(u)
        names = ph.projection.names
        if ok.any():
            for name, value in ph.projection.values(p[ok], temp[ok], self.reserve_kg, set_flow[ok], u[ok]).items():
                values[name][ok] = value
        due &= ok
        relative = {name: np.empty(0) for name in names}
        if due.any():
            known = np.isfinite(up[due]) & np.isfinite(ut[due]) & np.isfinite(u_std[due])
            projected = ph.projection.project(Measured(p[due], np.nan_to_num(up[due])),
                                              Measured(temp[due], np.nan_to_num(ut[due])), self.reserve_kg,
                                              set_flow[due], Measured(u[due], np.nan_to_num(u_std[due])))
            for name, result in projected.items():
                with np.errstate(invalid="ignore", divide="ignore"):
                    r = np.where(result.value == 0.0, 0.0, result.std_uncertainty / np.abs(result.value))
                relative[name] = np.where(known, r, np.nan)
        for name in names:
            std[name] = np.abs(values[name]) * self._carry("relative " + name, due, relative[name])

    def tank(self, t_s: np.ndarray, slot: np.ndarray, means: np.ndarray
             ) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
        """Tank-side estimates per closed block (mean times t_s, grid slots) from the means (tank p, tank T,
        feed p, feed T, flow)."""
        ph, s = self.physics, self.physics.settings
        p, measured_t, feed_p, feed_t, flow = means
        up, ut_sensor = ph.std("tank_pressure", p), ph.std("tank_temperature", measured_t)
        # A first-order thermometer reads T - tau dT/dt: add tau dT/dt back (dT/dt from a short trailing fit).
        slope, _, points = self.temperature_fit(t_s, slot, measured_t[None, :])
        # A slope from a nearly empty window (the first blocks of a run, or just after a dropout) is mostly the
        # thermometer's noise, which the lag time would multiply: correct only once the window is half full.
        half = (self.temperature_fit.blocks + 1) // 2
        slope = np.where(points[0] >= half, np.nan_to_num(slope[0]), 0.0)
        correction = s.temperature_lag_s * slope
        temp = measured_t + correction
        ut = np.hypot(ut_sensor, LAG_RELATIVE_STD * correction)
        values: dict[str, np.ndarray] = {}
        std: dict[str, np.ndarray] = {}
        pvt, pvt_std = pvt_gauge_kg(ph.gas, p, up, temp, ut, ph.volume_m3, ph.volume_std_m3)
        values["propellant_pvt_gauge_kg"], std["propellant_pvt_gauge_kg"] = pvt, pvt_std
        valid = np.isfinite(pvt)
        c_t = density_sensitivities(ph.gas, p, temp)[2] * ph.volume_m3
        lag_pvt = np.nan_to_num(c_t * correction)  # what the correction added to the PVT gauge, kg
        self.start_block = None
        if self.start is None and valid.any():
            self._begin(p, temp, up, ut, pvt, pvt_std, valid)
        known = np.arange(t_s.size) >= (self.start_block or 0)
        start = self.start or {"m0": np.nan, "m0_std": np.nan}
        values["m0_kg"] = values["initial_propellant_kg"] = np.where(known, start["m0"], np.nan)
        std["m0_kg"] = std["initial_propellant_kg"] = np.where(known, start["m0_std"], np.nan)
        if "feed_temperature" in ph.specs:
            nozzle_t, nozzle_t_std = feed_t, ph.std("feed_temperature", feed_t)
        else:
            enthalpy = ph.gas.enthalpy_j_kg(p, temp)
            nozzle_t, nozzle_t_std = ph.gas.throttled_temperature_k(enthalpy, np.minimum(feed_p, p), temp), ut
        values["feed_temperature_k"], std["feed_temperature_k"] = nozzle_t, nozzle_t_std
        values["feed_gamma"] = ph.gas.gamma(feed_p, nozzle_t)
        self._projections(slot, p, temp, up, ut, valid, values, std)
        with np.errstate(invalid="ignore", divide="ignore"):
            values["usable_propellant_fraction"] = values["usable_propellant_kg"] / self.usable_start_kg
            std["usable_propellant_fraction"] = std["usable_propellant_kg"] / self.usable_start_kg
        values["regulator_headroom_pa"], std["regulator_headroom_pa"] = p - ph.min_inlet_pressure_pa, up
        self._tank = {"slot": slot, "p": p, "t": temp, "up": up, "ut": ut, "valid": valid, "lag_pvt": lag_pvt, "flow": flow,
                      "pvt": pvt}
        return values, std

    def gauges(self, t_s: np.ndarray, flow_means: np.ndarray) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray]]:
        """Gauge difference and leak estimates per closed block (after tank() for the same blocks)."""
        ph, s, k = self.physics, self.physics.settings, self._tank
        used, used_std = flow_means
        if self.start_block is not None:
            self.start["used"], self.start["used_std"] = used[self.start_block], used_std[self.start_block]
        st = self.start if self.start is not None and "used" in self.start else None
        known = np.arange(t_s.size) >= (self.start_block or 0) if st is not None else np.zeros(t_s.size, bool)
        ref = np.where(known, st["used"] if st else np.nan, np.nan)
        ref_std = np.where(known, st["used_std"] if st else np.nan, np.nan)
        if st is not None:
            difference, difference_std = gauge_difference_kg(
                ph.gas, (k["p"], k["up"], k["t"], k["ut"]), (st["p"], st["up"], st["t"], st["ut"]), ph.volume_m3,
                ph.volume_std_m3, used - ref, np.maximum(used_std - ref_std, 0.0))
        else:
            difference = difference_std = np.full(t_s.size, np.nan)
        lag_flow = s.mass_flow_lag_s * np.nan_to_num(k["flow"])  # what the meter's compensation added to d
        difference_std = np.hypot(difference_std, LAG_RELATIVE_STD * lag_flow)
        flow_std = np.nan_to_num(ph.std("mass_flow", k["flow"]))
        with np.errstate(invalid="ignore", divide="ignore"):
            gain = np.nan_to_num(k["up"] / k["p"])
        rate, rate_std, suspected = self.leak(t_s, k["slot"], difference, k["lag_pvt"] + lag_flow, k["pvt"], flow_std, gain)
        values = {"gauge_difference_kg": difference, "leak_rate_kg_s": rate, "leak_suspected": suspected,
                  "used_ref_kg": ref}
        std = {"gauge_difference_kg": difference_std, "leak_rate_kg_s": rate_std, "used_ref_kg": ref_std}
        return values, std
