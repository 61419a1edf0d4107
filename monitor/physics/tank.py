"""Gas-tank contents and a blowdown prediction through a regulator and a nozzle.

The tank's state follows one thermodynamic path as it empties, chosen by the user:
- isothermal: T = T0 (a slow draw with heat flowing in from the walls);
- isentropic: s = s0 (a fast draw, adiabatic and reversible for the gas left in the tank);
- polytropic with exponent n: p / rho^n = p0 / rho0^n, temperature from the equation of state.
These are the textbook limits of tank blowdown (e.g. Sutton & Biblarz, Rocket Propulsion Elements,
ch. 6, pressurised feed systems; edition not checked). The gas's pressure and temperature for a given
density along the path come from monitor.physics.gas (real or ideal gas).

The regulator holds its set point while the tank is at or above its minimum inlet pressure; below it the
regulator is taken as fully open with the same pressure drop it had at drop-out, so the outlet pressure is
continuous (outlet = tank - (min inlet - set point)). The regulator throttles isenthalpically (Joule-Thomson
cooling in a real gas). The nozzle is the ideal isentropic nozzle of monitor.physics.nozzle fed at the
regulator's outlet state.

Because the state of the tank depends only on the mass left in it, the time to reach any mass is a
quadrature, t(m) = integral from m to m0 of dm' / mdot(m'), evaluated on a mass grid; mass is
conserved exactly by construction.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.integrate import cumulative_trapezoid
from scipy.optimize import brentq

from monitor.errors import PhysicsError
from monitor.physics import nozzle
from monitor.physics.gas import GasState, gas_state, specific_gas_constant_j_kg_k

# Flow below this fraction of the regulated flow counts as "flow has stopped".
FLOW_END_FRACTION = 0.01


@dataclass(frozen=True)
class TankPath:
    """The thermodynamic path a tank follows as it empties (see the module docstring)."""

    gas: str
    volume_m3: float
    initial_pressure_pa: float  # absolute
    initial_temperature_k: float
    expansion: str = "isentropic"  # "isothermal", "isentropic" or "polytropic"
    polytropic_exponent: float | None = None
    model: str = "real"

    def __post_init__(self) -> None:
        if self.volume_m3 <= 0.0 or self.initial_pressure_pa <= 0.0 or self.initial_temperature_k <= 0.0:
            raise PhysicsError(f"tank volume, pressure and temperature must be positive: {self}")
        if self.expansion not in ("isothermal", "isentropic", "polytropic"):
            raise PhysicsError(f"expansion {self.expansion!r}: expected isothermal, isentropic or polytropic")
        if self.expansion == "polytropic" and not (self.polytropic_exponent and self.polytropic_exponent >= 1.0):
            raise PhysicsError(f"polytropic expansion needs an exponent n >= 1, got {self.polytropic_exponent!r}")

    def initial_state(self) -> GasState:
        return gas_state(self.gas, self.model, pressure=self.initial_pressure_pa, temperature=self.initial_temperature_k)

    @property
    def initial_mass_kg(self) -> float:
        return float(self.initial_state().density_kg_m3) * self.volume_m3

    def state_at_mass(self, mass_kg) -> GasState:
        """State of the gas when `mass_kg` (float or array) is left in the tank."""
        density = np.asarray(mass_kg, dtype=float) / self.volume_m3
        start = self.initial_state()
        if self.expansion == "isothermal":
            return gas_state(self.gas, self.model, density=density, temperature=self.initial_temperature_k)
        if self.expansion == "isentropic":
            return gas_state(self.gas, self.model, density=density, entropy=np.broadcast_to(start.entropy_j_kg_k, density.shape))
        pressure = self.initial_pressure_pa * (density / start.density_kg_m3) ** self.polytropic_exponent
        return gas_state(self.gas, self.model, density=density, pressure=pressure)

    def mass_at_pressure_kg(self, pressure_pa: float) -> float:
        """Mass left when the tank pressure has fallen to `pressure_pa` (absolute) along this path."""
        if not 0.0 < pressure_pa <= self.initial_pressure_pa:
            raise PhysicsError(f"pressure {pressure_pa} Pa must be in (0, initial {self.initial_pressure_pa} Pa]")
        start = self.initial_state()
        if self.expansion == "isothermal":
            state = gas_state(self.gas, self.model, pressure=pressure_pa, temperature=self.initial_temperature_k)
            density = float(state.density_kg_m3)
        elif self.expansion == "isentropic":
            state = gas_state(self.gas, self.model, pressure=pressure_pa, entropy=start.entropy_j_kg_k)
            density = float(state.density_kg_m3)
        else:
            density = float(start.density_kg_m3) * (pressure_pa / self.initial_pressure_pa) ** (1.0 / self.polytropic_exponent)
        return density * self.volume_m3


def contents_kg(gas: str, pressure_pa, temperature_k, volume_m3: float, model: str = "real") -> np.ndarray:
    """Mass of gas in a tank from its absolute pressure (Pa), temperature (K) and volume (m^3): m = rho(p, T) V."""
    if volume_m3 <= 0.0:
        raise PhysicsError(f"tank volume must be positive, got {volume_m3} m^3")
    return gas_state(gas, model, pressure=pressure_pa, temperature=temperature_k).density_kg_m3 * volume_m3


def usable_mass_kg(path: TankPath, min_inlet_pressure_pa: float) -> float:
    """Mass that can leave the tank before its pressure falls to the regulator's minimum inlet pressure.

    Zero when the tank is already at or below that pressure.
    """
    if path.initial_pressure_pa <= min_inlet_pressure_pa:
        return 0.0
    return path.initial_mass_kg - path.mass_at_pressure_kg(min_inlet_pressure_pa)


@dataclass(frozen=True)
class FeedSystem:
    """Regulator and nozzle(s) downstream of the tank, with the ambient pressure they exhaust into."""

    set_pressure_pa: float  # regulator outlet set point, absolute
    min_inlet_pressure_pa: float  # lowest tank pressure at which the set point holds, absolute
    throat_area_m2: float  # of one nozzle
    exit_area_m2: float  # of one nozzle
    ambient_pressure_pa: float
    nozzle_count: int = 1
    discharge_coefficient: float = 1.0
    divergence_half_angle_rad: float = 0.0
    thrust_efficiency: float = 1.0

    def nozzle_performance(self, gas: str, stagnation: GasState) -> nozzle.NozzlePerformance:
        """One nozzle's ideal performance fed at a stagnation state (gamma of that state, R of the gas)."""
        return nozzle.nozzle_performance(
            stagnation.pressure_pa,
            stagnation.temperature_k,
            stagnation.gamma,
            specific_gas_constant_j_kg_k(gas),
            self.throat_area_m2,
            self.exit_area_m2,
            self.ambient_pressure_pa,
            discharge_coefficient=self.discharge_coefficient,
            divergence_half_angle_rad=self.divergence_half_angle_rad,
            thrust_efficiency=self.thrust_efficiency,
        )

    def outlet_pressure_pa(self, tank_pressure_pa) -> np.ndarray:
        """Regulator outlet pressure for a tank pressure: the set point, or tank minus the drop-out drop."""
        drop = self.min_inlet_pressure_pa - self.set_pressure_pa
        return np.minimum(self.set_pressure_pa, np.asarray(tank_pressure_pa, dtype=float) - drop)


@dataclass(frozen=True)
class Blowdown:
    """A predicted continuous firing from full tank until the flow stops; arrays share one time axis."""

    time_s: np.ndarray
    tank_mass_kg: np.ndarray
    tank_pressure_pa: np.ndarray
    tank_temperature_k: np.ndarray
    feed_pressure_pa: np.ndarray
    feed_temperature_k: np.ndarray
    mass_flow_kg_s: np.ndarray  # all nozzles
    thrust_n: np.ndarray  # all nozzles, at the ambient pressure
    thrust_vacuum_n: np.ndarray
    regulated: np.ndarray  # True while the regulator holds its set point
    regulator_dropout_s: float
    flow_end_s: float
    usable_mass_kg: float  # expelled while regulated
    residual_mass_kg: float  # left in the tank when the flow stops
    total_impulse_n_s: float  # at the ambient pressure
    total_impulse_vacuum_n_s: float


def _feed(path: TankPath, feed: FeedSystem, tank: GasState):
    outlet = feed.outlet_pressure_pa(tank.pressure_pa)
    flowing = outlet > feed.ambient_pressure_pa
    outlet_safe = np.where(flowing, outlet, feed.ambient_pressure_pa * 1.0001)
    down = gas_state(path.gas, path.model, pressure=np.minimum(outlet_safe, tank.pressure_pa), enthalpy=tank.enthalpy_j_kg)
    perf = feed.nozzle_performance(path.gas, down)
    n = feed.nozzle_count
    mdot = np.where(flowing, perf.mass_flow_kg_s * n, 0.0)
    thrust = np.where(flowing, perf.thrust_n * n, 0.0)
    thrust_vac = np.where(flowing, perf.thrust_vacuum_n * n, 0.0)
    return outlet, down.temperature_k, mdot, thrust, thrust_vac


def predict_blowdown(path: TankPath, feed: FeedSystem, points: int = 1200) -> Blowdown:
    """Predict a continuous firing from the tank's initial state until the flow stops.

    Args:
        path: the tank and its expansion path.
        feed: regulator and nozzles.
        points: mass-grid points in each of the regulated and unregulated phases.

    Returns:
        Blowdown with time histories and the summary figures.

    Raises:
        PhysicsError: the tank starts below the regulator's minimum inlet pressure or cannot flow at all.
    """
    if path.initial_pressure_pa <= feed.min_inlet_pressure_pa:
        raise PhysicsError(
            f"tank starts at {path.initial_pressure_pa:.6g} Pa, not above the regulator's minimum inlet "
            f"pressure {feed.min_inlet_pressure_pa:.6g} Pa: nothing to predict"
        )
    m0 = path.initial_mass_kg
    m_drop = path.mass_at_pressure_kg(feed.min_inlet_pressure_pa)
    drop_pa = feed.min_inlet_pressure_pa - feed.set_pressure_pa
    m_zero = path.mass_at_pressure_kg(feed.ambient_pressure_pa + drop_pa)  # flow stops here
    # Regulated phase: flow changes slowly, so a uniform grid suffices.
    m_reg = np.linspace(m0, m_drop, points)
    reg_flow0 = _feed(path, feed, path.state_at_mass(np.array([m0])))[2][0]
    if reg_flow0 <= 0.0:
        raise PhysicsError("the nozzle cannot flow at the regulator set point: check set point and ambient pressure")

    def flow_at(m: float) -> float:
        return float(_feed(path, feed, path.state_at_mass(np.array([m])))[2][0])

    threshold = FLOW_END_FRACTION * reg_flow0
    if flow_at(m_drop) <= threshold:
        m_end = m_drop
    else:
        m_end = brentq(lambda m: flow_at(m) - threshold, m_zero + (m_drop - m_zero) * 1e-9, m_drop, xtol=m0 * 1e-10)
    # Unregulated phase: flow falls steeply; cluster the grid towards the end.
    s = np.linspace(0.0, 1.0, points)[1:]
    m_free = m_drop - (m_drop - m_end) * (1.0 - (1.0 - s) ** 2)
    mass = np.concatenate([m_reg, m_free])
    tank = path.state_at_mass(mass)
    outlet, feed_t, mdot, thrust, thrust_vac = _feed(path, feed, tank)
    # t(m) = integral dm / mdot over the falling mass; dt = -dm / mdot.
    time_s = cumulative_trapezoid(1.0 / mdot, -mass, initial=0.0)
    impulse = float(np.trapezoid(thrust / mdot, -mass))
    impulse_vac = float(np.trapezoid(thrust_vac / mdot, -mass))
    return Blowdown(
        time_s=time_s,
        tank_mass_kg=mass,
        tank_pressure_pa=tank.pressure_pa,
        tank_temperature_k=tank.temperature_k,
        feed_pressure_pa=outlet,
        feed_temperature_k=feed_t,
        mass_flow_kg_s=mdot,
        thrust_n=thrust,
        thrust_vacuum_n=thrust_vac,
        regulated=np.arange(mass.size) < points,
        regulator_dropout_s=float(time_s[points - 1]),
        flow_end_s=float(time_s[-1]),
        usable_mass_kg=m0 - m_drop,
        residual_mass_kg=float(m_end),
        total_impulse_n_s=impulse,
        total_impulse_vacuum_n_s=impulse_vac,
    )
