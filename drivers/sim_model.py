"""Ground truth of a simulated cold-gas rig: tank mass integrated over the valve schedule, feed, flow and thrust.

Pure and deterministic: time is the sample index over the sample rate, never a clock. The gas physics is the
physics core's own (monitor.physics.tank: TankPath for the tank's state along its expansion path, _feed for
the regulator's isenthalpic throttling and the ideal nozzle of monitor.physics.nozzle), tabulated once on a
uniform tank-mass grid (and a set-point grid when a regulator droop is simulated) and interpolated linearly,
because a real-gas evaluation per sample would be far too slow.

Integration: the tank mass is advanced per chunk of samples (10 ms) by the midpoint rule (second-order
Runge-Kutta) with the regulator's steady flow at the chunk's set point times the fraction of the chunk the
valve is open, minus any leak. Between the valve and the nozzle, the feed line's small volume fills and
vents with a first-order time constant (the rig's feed_time_constant): the feed pressure (above ambient),
the nozzle's flow and its thrust follow their steady values through that lag, so with the valve closed the
flow stops and the feed pressure decays to ambient. A first-order lag conserves the integral of its input,
so the mass the nozzle expels over a firing equals the mass the tank gave. The tank never empties below the
state where the regulator's outlet reaches ambient pressure (the flow stops there); a leak stops there too.
"""

from __future__ import annotations

import bisect
import dataclasses
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy.signal import lfilter

from monitor.physics.tank import FeedSystem, TankPath, _feed

MASS_POINTS_1D = 2001  # mass grid without droop: ~0.1 g spacing for the bundled 1 L bottle
MASS_POINTS_2D = 601  # mass grid with a set-point grid (droop)
SET_POINTS_2D = 16
CHUNK_S = 0.01


@dataclass(frozen=True)
class FeedTables:
    """The rig's steady state on a uniform tank-mass grid (x) and an increasing set-point grid (y), SI units.

    tank_pressure_pa and tank_temperature_k have shape (mass,); the feed tables (set, mass).
    """

    mass_kg: np.ndarray
    set_pressure_pa: np.ndarray
    tank_pressure_pa: np.ndarray
    tank_temperature_k: np.ndarray
    feed_pressure_pa: np.ndarray
    feed_temperature_k: np.ndarray
    mass_flow_kg_s: np.ndarray
    thrust_n: np.ndarray

    @property
    def floor_kg(self) -> float:
        return float(self.mass_kg[0])


@lru_cache(maxsize=8)
def feed_tables(path: TankPath, feed: FeedSystem, set_points_pa: tuple[float, ...]) -> FeedTables:
    """Tabulate the tank's state and the regulated feed between a full tank and the end of flow.

    The lower end of the mass grid is where the tank's pressure minus the regulator's drop-out drop
    (min inlet minus set point, held for every set point) equals ambient: below it nothing flows.

    Args:
        path: the tank and its expansion path.
        feed: regulator and nozzles at the rig's set point.
        set_points_pa: the set points to cover (absolute Pa); one value tabulates that set point alone.

    Raises:
        PhysicsError: a state the gas model cannot give along the path.
    """
    drop_pa = feed.min_inlet_pressure_pa - feed.set_pressure_pa
    m_floor = path.mass_at_pressure_kg(feed.ambient_pressure_pa + drop_pa)
    if len(set_points_pa) == 1:
        mass = np.linspace(m_floor, path.initial_mass_kg, MASS_POINTS_1D)
        sets = np.array(set_points_pa, dtype=float)
    else:
        mass = np.linspace(m_floor, path.initial_mass_kg, MASS_POINTS_2D)
        grid = np.linspace(min(set_points_pa), max(set_points_pa), SET_POINTS_2D)
        sets = np.unique(np.concatenate([grid, set_points_pa, [feed.set_pressure_pa]]))
    tank = path.state_at_mass(mass)
    rows = []
    for s in sets:
        f = dataclasses.replace(feed, set_pressure_pa=float(s), min_inlet_pressure_pa=float(s) + drop_pa)
        outlet, feed_t, mdot, thrust, _ = _feed(path, f, tank)
        rows.append((np.maximum(outlet, feed.ambient_pressure_pa), feed_t, mdot, thrust))
    p, t, m, f = (np.array([r[k] for r in rows]) for k in range(4))
    return FeedTables(mass, sets, tank.pressure_pa, tank.temperature_k, p, t, m, f)


def _bilinear(tables: FeedTables, mass_kg: np.ndarray, set_pa: np.ndarray, *columns: np.ndarray) -> list[np.ndarray]:
    """Linear interpolation in mass and set point (clamped to the grid) of (set, mass) tables."""
    m = tables.mass_kg
    x = np.clip((np.asarray(mass_kg) - m[0]) / (m[1] - m[0]), 0.0, m.size - 1.0)
    i = np.minimum(x.astype(np.intp), m.size - 2)
    fx = x - i
    s = tables.set_pressure_pa
    if s.size == 1:
        return [c[0, i] * (1.0 - fx) + c[0, i + 1] * fx for c in columns]
    y = np.clip(np.asarray(set_pa, dtype=float), s[0], s[-1])
    j = np.clip(np.searchsorted(s, y, side="right") - 1, 0, s.size - 2)
    fy = (y - s[j]) / (s[j + 1] - s[j])
    return [(c[j, i] * (1.0 - fx) + c[j, i + 1] * fx) * (1.0 - fy) + (c[j + 1, i] * (1.0 - fx) + c[j + 1, i + 1] * fx) * fy
            for c in columns]


@dataclass
class Truth:
    """What really happened at each sample of one block (arrays share t_s), SI units, pressures absolute."""

    t_s: np.ndarray
    valve_open: np.ndarray  # bool, as commanded
    set_pressure_pa: np.ndarray
    tank_mass_kg: np.ndarray
    tank_pressure_pa: np.ndarray
    tank_temperature_k: np.ndarray
    feed_pressure_pa: np.ndarray
    feed_temperature_k: np.ndarray
    mass_flow_kg_s: np.ndarray  # out of the nozzle(s)
    thrust_n: np.ndarray
    leak_kg_s: np.ndarray


class TruthModel:
    """Advances the rig's true state block by block; running totals are kept as ground truth.

    Args:
        tables: from feed_tables.
        initial_mass_kg: propellant in the tank at t = 0.
        ambient_pressure_pa, ambient_temperature_k: where the feed line vents to and settles at.
        sample_rate_hz: samples per second.
        feed_time_constant_s: first-order time constant of the feed line (0: none).
    """

    def __init__(self, tables: FeedTables, initial_mass_kg: float, ambient_pressure_pa: float,
                 ambient_temperature_k: float, sample_rate_hz: float, feed_time_constant_s: float):
        self.tables = tables
        self.dt_s = 1.0 / sample_rate_hz
        self.chunk = max(1, int(round(CHUNK_S * sample_rate_hz)))
        self.ambient_pa, self.ambient_k = ambient_pressure_pa, ambient_temperature_k
        self.alpha = float(np.exp(-self.dt_s / feed_time_constant_s)) if feed_time_constant_s > 0.0 else 0.0
        self.initial_mass_kg = self.mass_kg = float(min(initial_mass_kg, tables.mass_kg[-1]))
        self.next_sample = 0
        self.total_impulse_n_s = 0.0  # sum of thrust * dt
        self.nozzle_mass_kg = 0.0  # sum of nozzle flow * dt
        self.leaked_kg = 0.0
        # Lag states: feed pressure above ambient, feed temperature, flow, thrust (the previous outputs).
        self._lagged = np.array([0.0, ambient_temperature_k, 0.0, 0.0])
        m = tables.mass_kg
        self._m0, self._dm, self._last = float(m[0]), float(m[1] - m[0]), m.size - 2
        self._flow = tables.mass_flow_kg_s.tolist()
        self._sets = tables.set_pressure_pa.tolist()

    @property
    def propellant_used_kg(self) -> float:
        """Mass that has left the tank (through the nozzle, in the feed line, or by a leak)."""
        return self.initial_mass_kg - self.mass_kg

    def _steady_flow(self, mass_kg: float, set_pa: float) -> float:
        """Scalar bilinear interpolation of the steady flow, as _bilinear (kept in plain floats for speed)."""
        x = min(max((mass_kg - self._m0) / self._dm, 0.0), self._last + 1.0)
        i = min(int(x), self._last)
        fx = x - i
        sets = self._sets
        if len(sets) == 1:
            row = self._flow[0]
            return row[i] + (row[i + 1] - row[i]) * fx
        y = min(max(set_pa, sets[0]), sets[-1])
        j = min(max(bisect.bisect_right(sets, y) - 1, 0), len(sets) - 2)
        fy = (y - sets[j]) / (sets[j + 1] - sets[j])
        a, b = self._flow[j], self._flow[j + 1]
        return (a[i] + (a[i + 1] - a[i]) * fx) * (1.0 - fy) + (b[i] + (b[i + 1] - b[i]) * fx) * fy

    def advance(self, valve_open: np.ndarray, set_pressure_pa: np.ndarray, leak_kg_s: np.ndarray) -> Truth:
        """The next len(valve_open) samples (a whole number of chunks, or the last, shorter block).

        Args:
            valve_open: bool per sample, the commanded valve state.
            set_pressure_pa: regulator set point per sample, absolute Pa.
            leak_kg_s: leak flow out of the tank per sample (taken while the tank is above its floor).
        """
        n, c, dt = valve_open.size, self.chunk, self.dt_s
        k0 = self.next_sample
        t_s = (k0 + np.arange(n)) * dt
        if n == 0:
            empty = np.empty(0)
            return Truth(t_s, np.zeros(0, dtype=bool), *([empty] * 9))
        starts = np.arange(0, n, c)
        sizes = np.diff(np.append(starts, n))
        open_s = np.add.reduceat(valve_open.astype(float), starts) * dt
        leak_kg = np.add.reduceat(leak_kg_s, starts) * dt
        set_chunk = set_pressure_pa[starts]
        bounds = np.empty(starts.size + 1)
        mids = np.empty(starts.size)
        m, floor = self.mass_kg, self.tables.floor_kg
        leaked = 0.0
        for j, (o, lk, s) in enumerate(zip(open_s.tolist(), leak_kg.tolist(), set_chunk.tolist())):
            bounds[j] = m
            out = 0.0
            if o > 0.0:
                mids[j] = max(m - 0.5 * (o * self._steady_flow(m, s) + lk), floor)
                out = o * self._steady_flow(mids[j], s)
            else:
                mids[j] = max(m - 0.5 * lk, floor)
            lk = min(lk, max(m - out - floor, 0.0))  # a leak stops at the floor
            leaked += lk
            m = max(m - out - lk, floor)
        bounds[-1] = m
        self.leaked_kg += leaked
        self.mass_kg = m
        # Per sample: tank mass linear within each chunk; steady feed at each chunk's midpoint mass.
        chunk_of = np.repeat(np.arange(starts.size), sizes)
        frac = (np.arange(n) - starts[chunk_of]) / sizes[chunk_of]
        mass = bounds[chunk_of] + (bounds[chunk_of + 1] - bounds[chunk_of]) * frac
        tb = self.tables
        p_out, t_out, mdot, thrust = _bilinear(tb, mids, set_chunk, tb.feed_pressure_pa, tb.feed_temperature_k,
                                              tb.mass_flow_kg_s, tb.thrust_n)
        steady = np.stack([(p_out - self.ambient_pa)[chunk_of], t_out[chunk_of], mdot[chunk_of], thrust[chunk_of]])
        steady[:, ~valve_open] = np.array([[0.0], [self.ambient_k], [0.0], [0.0]])
        lagged = self._lag(steady)
        tank_p = np.interp(mass, tb.mass_kg, tb.tank_pressure_pa)
        tank_t = np.interp(mass, tb.mass_kg, tb.tank_temperature_k)
        self.total_impulse_n_s += float(lagged[3].sum()) * dt
        self.nozzle_mass_kg += float(lagged[2].sum()) * dt
        self.next_sample = k0 + n
        leaking = np.where(mass > floor, leak_kg_s, 0.0)
        return Truth(t_s, valve_open.copy(), set_pressure_pa.copy(), mass, tank_p, tank_t,
                     lagged[0] + self.ambient_pa, lagged[1], lagged[2], lagged[3], leaking)

    def _lag(self, steady: np.ndarray) -> np.ndarray:
        """y[k] = a y[k-1] + (1 - a) x[k] on each row, continuing from the previous block."""
        a = self.alpha
        if a == 0.0:
            out = steady
        else:
            out, _ = lfilter([1.0 - a], [1.0, -a], steady, axis=1, zi=(a * self._lagged)[:, None])
        self._lagged = out[:, -1].copy()
        return out
