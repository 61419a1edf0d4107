"""Precomputed property tables that let the estimators evaluate real-gas and nozzle physics per sample.

A real-gas flash through CoolProp takes about 10 us; at 50,000 samples per second that is most of a core.
So the physics core is evaluated once, on regular grids, when an Estimator is built, and per sample the
estimators interpolate bilinearly in those tables:

* compressibility Z(p, T), enthalpy h(p, T) and gamma(p, T) of the rig's gas (monitor.physics.gas);
  density is p / (Z R T), which keeps its precision because Z is smooth and close to 1;
* the usable mass per unit tank volume from a tank state (p, T) down to the regulator's minimum inlet
  pressure along the rig's expansion path (the formulas of monitor.physics.tank.TankPath.mass_at_pressure_kg);
* the nozzle's effective exhaust velocity and mass flow divided by their stagnation scales,
  phi = u / sqrt(R T0) and psi = mdot sqrt(R T0) / (p0 At), as functions of pa/p0 and gamma: with a
  calorically perfect gas these are exact similarity variables of monitor.physics.nozzle.nozzle_performance
  (every velocity scales with sqrt(R T0), the flow with p0 / sqrt(R T0)).

Tables are cached per gas, model, grid and geometry, so building several estimators for one rig is cheap.
Outside a table, or where the gas model has no single-phase state, lookups give NaN.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from monitor.errors import PhysicsError
from monitor.physics import nozzle
from monitor.physics.gas import GasState, gas_state, specific_gas_constant_j_kg_k

_NEWTON_STEPS = 4
_ISOBAR_POINTS = 1500  # temperatures of the p_min isobar for isentropic end states


@dataclass(frozen=True, eq=False)
class Grid2D:
    """Values z[i, j] on the uniform grid x0 + i dx, y0 + j dy, interpolated bilinearly; NaN outside."""

    x: np.ndarray
    y: np.ndarray
    z: np.ndarray

    def __post_init__(self) -> None:
        object.__setattr__(self, "z", np.ascontiguousarray(self.z, dtype=float))
        object.__setattr__(self, "_flat", self.z.ravel())

    def _cells(self, x, y):
        x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
        gx, gy = self.x, self.y
        nx, ny = gx.size, gy.size
        with np.errstate(invalid="ignore"):
            fx = (x - gx[0]) * (1.0 / (gx[1] - gx[0]))
            fy = (y - gy[0]) * (1.0 / (gy[1] - gy[0]))
            inside = (fx >= 0.0) & (fx <= nx - 1) & (fy >= 0.0) & (fy <= ny - 1)
        fx, fy = np.where(inside, fx, 0.0), np.where(inside, fy, 0.0)
        i = np.minimum(fx.astype(np.intp), nx - 2)
        j = np.minimum(fy.astype(np.intp), ny - 2)
        fx -= i
        fy -= j
        k = i * ny + j
        z = self._flat  # type: ignore[attr-defined]
        return inside, fx, fy, z[k], z[k + ny], z[k + 1], z[k + ny + 1]

    def __call__(self, x, y) -> np.ndarray:
        """Interpolated value at (x, y) (arrays broadcast); NaN outside the grid or next to a NaN node."""
        inside, fx, fy, z00, z10, z01, z11 = self._cells(x, y)
        low = z00 + (z10 - z00) * fx
        value = low + (z01 + (z11 - z01) * fx - low) * fy
        return np.where(inside, value, np.nan)

    def partials(self, x, y) -> tuple[np.ndarray, np.ndarray]:
        """(dz/dx, dz/dy) of the bilinear interpolant at (x, y); NaN outside."""
        return self.evaluate(x, y)[1:]

    def evaluate(self, x, y) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(value, dz/dx, dz/dy) of the bilinear interpolant at (x, y) from one cell lookup; NaN outside."""
        inside, fx, fy, z00, z10, z01, z11 = self._cells(x, y)
        low, high = z10 - z00, z11 - z01  # steps along x at the two y edges of the cell
        value = z00 + low * fx + (z01 - z00 + (high - low) * fx) * fy
        dzdx = (low + (high - low) * fy) * (1.0 / (self.x[1] - self.x[0]))
        dzdy = (z01 - z00 + (high - low) * fx) * (1.0 / (self.y[1] - self.y[0]))
        nan = np.nan
        return np.where(inside, value, nan), np.where(inside, dzdx, nan), np.where(inside, dzdy, nan)


def _states(gas: str, model: str, **inputs: np.ndarray) -> GasState:
    """gas_state on a 2-D grid (rows x columns of rising temperature or entropy), NaN where the model fails.

    A row the model cannot take whole (a low-temperature end that would condense) is cut at the smallest
    column from which the rest of the row works, found by bisection; the columns below it are NaN.
    """
    try:
        return gas_state(gas, model, **inputs)
    except PhysicsError:
        pass
    shape = np.broadcast_shapes(*(np.shape(v) for v in inputs.values()))
    arrays = {k: np.broadcast_to(v, shape) for k, v in inputs.items()}
    out = {f: np.full(shape, np.nan) for f in GasState.__dataclass_fields__}

    def tail(row: int, first: int) -> GasState | None:
        try:
            return gas_state(gas, model, **{k: a[row, first:] for k, a in arrays.items()})
        except PhysicsError:
            return None

    for row in range(shape[0]):
        low, high = 0, shape[1]  # tail(row, high) is empty; find the smallest first that works
        while low < high:
            mid = (low + high) // 2
            if tail(row, mid) is None:
                low = mid + 1
            else:
                high = mid
        if low < shape[1]:
            state = tail(row, low)
            for f in out:
                out[f][row, low:] = getattr(state, f)
    return GasState(**out)


@dataclass(frozen=True, eq=False)
class GasTables:
    """Z, h and gamma of one gas on a (pressure Pa, temperature K) grid; R in J/(kg K)."""

    gas: str
    model: str
    gas_constant_j_kg_k: float
    compressibility: Grid2D
    enthalpy_j_kg: Grid2D
    gamma: Grid2D

    def density_kg_m3(self, pressure_pa, temperature_k) -> np.ndarray:
        """rho = p / (Z R T), kg/m^3 (the definition of Z); NaN outside the table."""
        p, t = np.asarray(pressure_pa, dtype=float), np.asarray(temperature_k, dtype=float)
        return p / (self.compressibility(p, t) * self.gas_constant_j_kg_k * t)

    def throttled_temperature_k(self, enthalpy_j_kg, pressure_pa, start_k) -> np.ndarray:
        """Temperature after an isenthalpic throttle to pressure_pa: solves h(p, T) = h for T by Newton's method.

        The iteration works on the bilinear interpolant of h, which is linear in T within a cell, so it
        settles exactly on the table's answer. Args in J/kg, Pa absolute, K; returns K (NaN outside).
        """
        h = np.asarray(enthalpy_j_kg, dtype=float)
        p = np.asarray(pressure_pa, dtype=float)
        t = np.clip(np.asarray(start_k, dtype=float), self.gamma.y[0], self.gamma.y[-1])
        low, high = self.gamma.y[0], self.gamma.y[-1]
        for _ in range(_NEWTON_STEPS):
            value, _, slope = self.enthalpy_j_kg.evaluate(p, t)
            with np.errstate(invalid="ignore", divide="ignore"):
                t = np.clip(t + (h - value) / slope, low, high)
        with np.errstate(invalid="ignore"):
            converged = np.abs(self.enthalpy_j_kg(p, t) - h) <= 1e-6 * np.abs(h) + 1e-3
        return np.where(converged, t, np.nan)


@lru_cache(maxsize=16)
def gas_tables(gas: str, model: str, pressure_pa: tuple[float, float, int],
               temperature_k: tuple[float, float, int]) -> GasTables:
    """Tabulate Z, h and gamma from the physics core on linspace grids given as (low, high, points)."""
    p = np.linspace(*pressure_pa)
    t = np.linspace(*temperature_k)
    s = _states(gas, model, pressure=p[:, None], temperature=t[None, :])
    return GasTables(gas, model, specific_gas_constant_j_kg_k(gas), Grid2D(p, t, s.compressibility),
                     Grid2D(p, t, s.enthalpy_j_kg), Grid2D(p, t, s.gamma))


@lru_cache(maxsize=16)
def usable_density_table(gas: str, model: str, expansion: str, polytropic_exponent: float | None,
                         min_inlet_pressure_pa: float, pressure_pa: tuple[float, int],
                         temperature_k: tuple[float, float, int]) -> Grid2D:
    """Usable mass per tank volume, kg/m^3, from (p, T) down to the minimum inlet pressure along a path.

    rho(p, T) - rho_end with rho_end = rho(p_min, T) (isothermal), rho(p_min, s(p, T)) (isentropic) or
    rho(p, T) (p_min/p)^(1/n) (polytropic): TankPath.mass_at_pressure_kg per unit volume (monitor.physics.tank).
    The isentropic end density is interpolated in s along a fine isobar at p_min (pressure-temperature
    flashes only, which are several times cheaper than pressure-entropy ones). The grid runs from p_min
    (usable 0) to pressure_pa = (high, points); below p_min the usable mass is 0.
    """
    p = np.linspace(min_inlet_pressure_pa, pressure_pa[0], pressure_pa[1])
    t = np.linspace(*temperature_k)
    start = _states(gas, model, pressure=p[:, None], temperature=t[None, :])
    if expansion == "isothermal":
        rho_end = start.density_kg_m3[:1, :]
    elif expansion == "isentropic":
        isobar_t = np.linspace(0.3 * t[0], t[-1], _ISOBAR_POINTS)[None, :]
        isobar = _states(gas, model, pressure=np.full(isobar_t.shape, min_inlet_pressure_pa), temperature=isobar_t)
        good = np.isfinite(isobar.entropy_j_kg_k[0])
        s_end, rho = isobar.entropy_j_kg_k[0][good], isobar.density_kg_m3[0][good]
        s = start.entropy_j_kg_k
        inside = (s >= s_end[0]) & (s <= s_end[-1]) if s_end.size else np.zeros(s.shape, dtype=bool)
        rho_end = np.where(inside, np.interp(s, s_end, rho) if s_end.size else np.nan, np.nan)
    else:
        rho_end = start.density_kg_m3 * (min_inlet_pressure_pa / p[:, None]) ** (1.0 / polytropic_exponent)
    usable = start.density_kg_m3 - rho_end
    usable[0, :] = np.where(np.isfinite(usable[0, :]), 0.0, np.nan)  # exactly nothing at p_min
    return Grid2D(p, t, usable)


@dataclass(frozen=True, eq=False)
class NozzleTables:
    """phi = u/sqrt(R T0) and psi = mdot sqrt(R T0)/(p0 At) of one nozzle on a (pa/p0, gamma) grid.

    choke_ratio holds, per gamma of the grid, the largest pa/p0 at which the throat is sonic.
    """

    velocity: Grid2D
    flow: Grid2D
    choke_ratio: np.ndarray

    def choked(self, ambient_over_feed, gamma) -> np.ndarray:
        """True where the throat is sonic at pa/p0 (linear interpolation of the choking ratio in gamma)."""
        g = np.clip(gamma, self.velocity.y[0], self.velocity.y[-1])
        return np.asarray(ambient_over_feed) <= np.interp(g, self.velocity.y, self.choke_ratio)


@lru_cache(maxsize=16)
def nozzle_tables(area_ratio: float, discharge_coefficient: float, divergence_half_angle_rad: float,
                  thrust_efficiency: float, gamma: tuple[float, float, int], ratio_points: int = 801) -> NozzleTables:
    """Tabulate nozzle_performance (monitor.physics.nozzle) in similarity variables.

    Args:
        area_ratio: exit over throat area, >= 1.
        discharge_coefficient, divergence_half_angle_rad, thrust_efficiency: as in nozzle_performance.
        gamma: (low, high, points) of the gamma grid; a single point is widened by +/- 0.01.
        ratio_points: points of the pa/p0 grid on [0, 1].
    """
    low, high, count = gamma
    if high - low < 1e-3:
        low, high, count = low - 0.01, high + 0.01, 3
    g = np.linspace(low, high, max(int(count), 2))
    r = np.linspace(0.0, 1.0, ratio_points)
    rr, gg = np.meshgrid(r, g, indexing="ij")
    t0_k, r_gas, p0_pa = 300.0, 287.0, 1.0e6  # any scales: the results are divided by them
    perf = nozzle.nozzle_performance(p0_pa, t0_k, gg, r_gas, 1.0, area_ratio, rr * p0_pa,
                                     discharge_coefficient, divergence_half_angle_rad, thrust_efficiency)
    scale = np.sqrt(r_gas * t0_k)
    velocity = np.where(rr < 1.0, perf.effective_exhaust_velocity_m_s / scale, 0.0)
    flow = perf.mass_flow_kg_s * scale / p0_pa
    sub = nozzle.mach_from_area_ratio(area_ratio, g, supersonic=False)
    choke = nozzle.pressure_ratio(sub, g)
    return NozzleTables(Grid2D(r, g, velocity), Grid2D(r, g, flow), np.asarray(choke))
