"""The rig file's [simulation] table: sample rate, seed, valve schedule, sensor behaviour and faults, checked.

Every key is checked and reported as a ConfigError naming the key (e.g. "simulation.faults[1].start"), the
value and what was expected; unknown keys are errors. Named scenarios ([simulation.scenarios.NAME]) replace
the base table's duration, seed, pulses, valve_open and faults with their own. The format is documented in
docs/simulator.md.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from monitor.config import Rig, RigTable
from monitor.errors import ConfigError
from monitor.units import parse_quantity

# What a scenario may replace, and the fault kinds with the keys each one takes (besides "kind").
SCENARIO_KEYS = ("description", "duration", "seed", "pulses", "valve_open", "faults")
FAULT_KEYS: dict[str, tuple[str, ...]] = {
    "stuck": ("channel", "start"),
    "dropout": ("channel", "start", "duration", "send"),
    "spikes": ("channel", "rate", "size", "start", "duration"),
    "leak": ("rate", "start"),
    "droop": ("start", "rate", "set_point"),
    "link_loss": ("start", "duration"),
}
# First-order lag of each kind of sensor when [simulation.sensors.NAME] gives none: a sheathed thermocouple
# in a gas stream (a few seconds) and a thermal mass-flow meter (a few tenths of a second); common
# practice, no source. Pressure transducers and load cells are taken as instantaneous.
DEFAULT_LAG_S = {"tank_temperature": 2.0, "feed_temperature": 2.0, "mass_flow": 0.3}
MAX_SAMPLE_RATE_HZ = 100_000.0


@dataclass(frozen=True)
class Fault:
    """One fault; times in s from the start of the run, rates in SI (kg/s, Pa/s, 1/s), size in raw units."""

    kind: str
    start_s: float
    channel: str | None = None
    duration_s: float = math.inf
    send: str = "nan"  # dropout: "nan" or "empty"
    rate: float = 0.0  # spikes: 1/s; leak: kg/s; droop: Pa/s (0: a step to set_point_pa)
    size: float = 0.0  # spikes: raw units of the channel
    set_point_pa: float | None = None  # droop: the new set point (floor of a ramp), absolute

    @property
    def end_s(self) -> float:
        return self.start_s + self.duration_s


@dataclass(frozen=True)
class SensorSpec:
    """How one simulated sensor misbehaves: noise, resolution and offset in the units it sends; lag in s."""

    noise: float = 0.0  # standard deviation of Gaussian noise
    resolution: float = 0.0  # quantisation step (ADC); 0: none
    lag_s: float = 0.0  # first-order time constant
    offset: float = 0.0  # added to every reading (a load cell's zero, for example)


@dataclass(frozen=True)
class Scenario:
    """A checked [simulation] table with one scenario applied."""

    name: str | None
    description: str
    sample_rate_hz: float
    seed: int
    duration_s: float
    feed_time_constant_s: float
    open_intervals_s: tuple[tuple[float, float], ...]  # merged, sorted [start, end) intervals
    faults: tuple[Fault, ...]
    sensors: dict[str, SensorSpec]  # channel name -> spec (only those given)

    def faults_of(self, kind: str) -> tuple[Fault, ...]:
        return tuple(f for f in self.faults if f.kind == kind)

    def sensor(self, channel: str, role: str | None) -> SensorSpec:
        """The channel's sensor spec, or the default for its role."""
        return self.sensors.get(channel, SensorSpec(lag_s=DEFAULT_LAG_S.get(role or "", 0.0)))


def valve_open(t_s: np.ndarray, intervals: tuple[tuple[float, float], ...]) -> np.ndarray:
    """True where a time (s) lies in one of the merged, sorted [start, end) intervals."""
    t = np.asarray(t_s, dtype=float)
    if not intervals:
        return np.zeros(t.shape, dtype=bool)
    starts = np.array([a for a, _ in intervals])
    ends = np.array([b for _, b in intervals])
    k = np.searchsorted(starts, t, side="right") - 1
    return (k >= 0) & (t < ends[np.maximum(k, 0)])


def scenario_names(rig: Rig) -> tuple[str, ...]:
    """Names of the scenarios in the rig's [simulation.scenarios] table (unchecked)."""
    scenarios = rig.simulation.get("scenarios", {})
    return tuple(scenarios) if isinstance(scenarios, dict) else ()


def parse_simulation(rig: Rig, channels: dict[str, str | None], scenario: str | None = None) -> Scenario:
    """Check the rig's [simulation] table and apply one scenario.

    Args:
        rig: the loaded rig (rig.simulation is its raw table; an absent table gives the defaults).
        channels: name -> role of the channels the simulator sends, for faults and sensors that name one.
        scenario: a name under [simulation.scenarios]; None: the table's own `scenario` key, or none.

    Raises:
        ConfigError: any key missing, unknown or wrong, or an unknown scenario name.
    """
    src = rig.source_path
    top = RigTable(rig.simulation, "simulation", src)
    rate = _rate_hz(top, "sample_rate", "1 kHz")
    if not 1.0 <= rate <= MAX_SAMPLE_RATE_HZ:
        raise top.fail("sample_rate", f"a rate from 1 Hz to {MAX_SAMPLE_RATE_HZ:g} Hz")
    tau = top.quantity("feed_time_constant", "time", "20 ms", positive=False)
    if tau < 0.0:
        raise top.fail("feed_time_constant", "a time of zero or more")
    sensors = _sensors(top, channels)
    scenarios = top.raw("scenarios", {})
    if not isinstance(scenarios, dict):
        raise top.fail("scenarios", "a table of named scenarios ([simulation.scenarios.NAME])")
    base = _layer(top, channels, rig.ambient_pressure_pa)
    layers = {}
    for name in scenarios:
        layer = RigTable(scenarios[name], f"simulation.scenarios.{name}", src)
        for key in layer.data:
            if key not in SCENARIO_KEYS:
                raise layer.fail(key, "no such key in a scenario; it may set " + ", ".join(SCENARIO_KEYS))
        layers[name] = _layer(layer, channels, rig.ambient_pressure_pa)
    expected = "one of the scenarios " + (", ".join(scenarios) or "(none defined)")
    default = top.raw("scenario", None)
    if default is not None and (not isinstance(default, str) or default not in scenarios):
        raise top.fail("scenario", expected)
    chosen = default if scenario is None else scenario
    if chosen not in scenarios and chosen is not None:
        raise ConfigError("scenario", chosen, expected, src)
    top.finish()
    values = {**base, **(layers[chosen] if chosen is not None else {})}
    return Scenario(
        chosen,
        values["description"],
        rate,
        values["seed"],
        values["duration"],
        tau,
        _merge(values["pulses"] + values["valve_open"]),
        values["faults"],
        sensors,
    )


def _layer(t: RigTable, channels: dict[str, str | None], ambient_pa: float) -> dict[str, Any]:
    """The scenario keys a table gives, checked (all of them, with their defaults, for the base table)."""
    base = t.prefix == "simulation"
    out: dict[str, Any] = {}
    if base or "description" in t.data:
        out["description"] = t.raw("description", "")
        if not isinstance(out["description"], str):
            raise t.fail("description", "a string")
    if base or "seed" in t.data:
        out["seed"] = t.raw("seed", 0)
        if isinstance(out["seed"], bool) or not isinstance(out["seed"], int) or not 0 <= out["seed"] < 2**63:
            raise t.fail("seed", "a whole number from 0 to 2**63 - 1")
    if base or "duration" in t.data:
        out["duration"] = t.quantity("duration", "time", "60 s")
    if base or "pulses" in t.data:
        out["pulses"] = _pulses(t)
    if base or "valve_open" in t.data:
        out["valve_open"] = _valve_open(t)
    if base or "faults" in t.data:
        out["faults"] = _faults(t, channels, ambient_pa)
    return out


def _rate_hz(t: RigTable, name: str, default: Any) -> float:
    """A rate such as "1 kHz" or "5 /s", in 1/s (read through its period)."""
    value = t.raw(name, default)
    if not isinstance(value, str):
        raise t.fail(name, "a rate with its unit, such as '1 kHz' or '5 /s'")
    try:
        period_s = parse_quantity(f"1 / ({value})", "time", t.key(name), t.source)
    except ConfigError:
        raise t.fail(name, "a rate with its unit, such as '1 kHz' or '5 /s'") from None
    if not (period_s > 0.0 and math.isfinite(period_s)):
        raise t.fail(name, "a positive rate")
    return 1.0 / period_s


def _table_array(t: RigTable, name: str) -> list[RigTable]:
    value = t.raw(name, [])
    if not isinstance(value, list) or not all(isinstance(v, dict) for v in value):
        raise t.fail(name, f"an array of tables ([[{t.key(name)}]])")
    return [RigTable(v, f"{t.key(name)}[{i}]", t.source) for i, v in enumerate(value)]


def _time(t: RigTable, name: str, default: Any = ..., positive: bool = False) -> float:
    value = t.quantity(name, "time", default, positive=positive)
    if value < 0.0:
        raise t.fail(name, "a time of zero or more")
    return value


def _pulses(t: RigTable) -> list[tuple[float, float]]:
    out = []
    for p in _table_array(t, "pulses"):
        start, on, off = _time(p, "start"), _time(p, "on", positive=True), _time(p, "off", positive=True)
        count = p.raw("count", 1)
        if isinstance(count, bool) or not isinstance(count, int) or not 1 <= count <= 1_000_000:
            raise p.fail("count", "a whole number of pulses from 1 to 1000000")
        p.finish()
        out.extend((start + k * (on + off), start + k * (on + off) + on) for k in range(count))
    return out


def _valve_open(t: RigTable) -> list[tuple[float, float]]:
    value = t.raw("valve_open", [])
    key = t.key("valve_open")
    if not isinstance(value, list):
        raise t.fail("valve_open", 'an array of [open, close] time pairs, such as [["5 s", "7.5 s"]]')
    out = []
    for i, pair in enumerate(value):
        if not isinstance(pair, list) or len(pair) != 2:
            raise ConfigError(f"{key}[{i}]", pair, "an [open, close] pair of times", t.source)
        a, b = (parse_quantity(v, "time", f"{key}[{i}]", t.source) for v in pair)
        if not 0.0 <= a < b:
            raise ConfigError(f"{key}[{i}]", pair, "an open time of zero or more before the close time", t.source)
        out.append((a, b))
    return out


def _merge(intervals: list[tuple[float, float]]) -> tuple[tuple[float, float], ...]:
    merged: list[list[float]] = []
    for a, b in sorted(intervals):
        if merged and a <= merged[-1][1]:
            merged[-1][1] = max(merged[-1][1], b)
        else:
            merged.append([a, b])
    return tuple((a, b) for a, b in merged)


def _channel(t: RigTable, channels: dict[str, str | None]) -> str:
    name = t.raw("channel")
    if name not in channels:
        raise t.fail("channel", "one of the channels the simulator sends: " + ", ".join(channels))
    return name


def _faults(t: RigTable, channels: dict[str, str | None], ambient_pa: float) -> tuple[Fault, ...]:
    faults = []
    for f in _table_array(t, "faults"):
        kind = f.choice("kind", tuple(FAULT_KEYS))
        for key in f.data:
            if key != "kind" and key not in FAULT_KEYS[kind]:
                raise f.fail(key, f"no such key for a {kind!r} fault; it takes " + ", ".join(FAULT_KEYS[kind]))
        if kind == "stuck":
            fault = Fault(kind, _time(f, "start"), _channel(f, channels))
        elif kind == "dropout":
            fault = Fault(
                kind,
                _time(f, "start"),
                _channel(f, channels),
                _time(f, "duration", positive=True),
                send=f.choice("send", ("nan", "empty"), "nan"),
            )
        elif kind == "spikes":
            size = f.number("size")
            if size == 0.0 or not math.isfinite(size):
                raise f.fail("size", "a non-zero finite size, in the units the sensor sends")
            fault = Fault(
                kind,
                _time(f, "start", "0 s"),
                _channel(f, channels),
                _time(f, "duration", positive=True) if "duration" in f.data else math.inf,
                rate=_rate_hz(f, "rate", ...),
                size=size,
            )
        elif kind == "leak":
            fault = Fault(kind, _time(f, "start"), rate=f.quantity("rate", "mass_flow"))
        elif kind == "link_loss":
            fault = Fault(kind, _time(f, "start"), duration_s=_time(f, "duration", positive=True))
        else:
            fault = _droop(f, ambient_pa)
        f.finish()
        faults.append(fault)
    if len([x for x in faults if x.kind == "droop"]) > 1:
        raise t.fail("faults", "at most one 'droop' fault")
    return tuple(faults)


def _droop(f: RigTable, ambient_pa: float) -> Fault:
    if "rate" not in f.data and "set_point" not in f.data:
        raise ConfigError(f.key("rate"), None, "a rate (such as '0.2 bar/s'), a set_point, or both", f.source)
    rate = 0.0
    if "rate" in f.data:
        value = f.raw("rate")
        try:
            rate = parse_quantity(f"({value}) * (1 s)", "pressure", f.key("rate"), f.source)
        except ConfigError:
            raise f.fail("rate", "a pressure per time, such as '0.2 bar/s'") from None
        if not rate > 0.0:
            raise f.fail("rate", "a positive pressure per time")
    set_point = f.pressure("set_point", ambient_pa, None)
    if set_point is not None and set_point <= ambient_pa:
        raise f.fail("set_point", "a set point above ambient pressure")
    return Fault("droop", _time(f, "start"), rate=rate, set_point_pa=set_point)


def _sensors(top: RigTable, channels: dict[str, str | None]) -> dict[str, SensorSpec]:
    table = RigTable(top.raw("sensors", {}), "simulation.sensors", top.source)
    out = {}
    for name in table.data:
        if name not in channels:
            raise table.fail(name, "a table named after one of the channels the simulator sends: " + ", ".join(channels))
        t = RigTable(table.raw(name), table.key(name), top.source)
        noise, resolution = t.number("noise", 0.0, low=0.0), t.number("resolution", 0.0, low=0.0)
        for key, value in (("noise", noise), ("resolution", resolution)):
            if not math.isfinite(value):
                raise t.fail(key, "a finite number of zero or more, in the units the sensor sends")
        lag = _time(t, "lag", f"{DEFAULT_LAG_S.get(channels[name] or '', 0.0)} s")
        offset = t.number("offset", 0.0)
        if not math.isfinite(offset):
            raise t.fail("offset", "a finite number, in the units the sensor sends")
        t.finish()
        out[name] = SensorSpec(noise, resolution, lag, offset)
    table.finish()
    return out


def droop_set_points_pa(scenario: Scenario, set_pressure_pa: float, ambient_pa: float) -> tuple[float, ...]:
    """The set points a droop can pass through: the range the feed tables must cover (absolute Pa)."""
    droop = scenario.faults_of("droop")
    if not droop:
        return (set_pressure_pa,)
    d = droop[0]
    low = d.set_point_pa if d.set_point_pa is not None else ambient_pa
    return tuple(sorted({set_pressure_pa, low}))


def set_point_pa(t_s: np.ndarray, scenario: Scenario, set_pressure_pa: float, ambient_pa: float) -> np.ndarray:
    """The regulator set point at each time (s), absolute Pa: the rig's, or as a droop fault changes it.

    A droop with a rate ramps from the rig's set point towards its set_point (or ambient) at that rate;
    without a rate it steps to set_point at its start.
    """
    t = np.asarray(t_s, dtype=float)
    out = np.full(t.shape, float(set_pressure_pa))
    for d in scenario.faults_of("droop"):
        target = d.set_point_pa if d.set_point_pa is not None else ambient_pa
        after = t >= d.start_s
        if d.rate == 0.0:
            out[after] = target
        else:
            step = np.sign(target - set_pressure_pa) * d.rate * (t[after] - d.start_s)
            ramp = set_pressure_pa + step
            out[after] = np.minimum(ramp, target) if target > set_pressure_pa else np.maximum(ramp, target)
    return out
