"""A simulated cold-gas rig: its ground truth, its sensors' text lines, and an in-process driver paced by a clock.

RigSimulator strings together the truth model (drivers.sim_model), the sensors (drivers.sim_sensors) and the
[simulation] table (drivers.sim_scenario) and produces fixed blocks of one second of samples; it is pure and
deterministic for a seed. generate_lines runs it as fast as it can (logs, benchmarks); SimulatedDriver hands
its lines out as their device time comes on an injected clock, read by the same line parser (and the same
stream checks) as the serial driver. `ejecta simulate` writes the same lines to a pseudo-terminal.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

import numpy as np

from drivers.base import Driver, RawBatch
from drivers.line_format import LineFormat
from drivers.line_parsing import parse_lines
from drivers.serial_lines import SerialLinesDriver, StreamWatch
from drivers.sim_model import CHUNK_S, Truth, TruthModel, feed_tables
from drivers.sim_scenario import Scenario, droop_set_points_pa, parse_simulation, set_point_pa, valve_open
from drivers.sim_sensors import SensorBank
from monitor.calibration import ChannelSpec, parse_channels
from monitor.clock import Clock
from monitor.config import Rig
from monitor.errors import ConfigError, PhysicsError
from monitor.predict import feed_system, tank_path
from monitor.samples import LinkEvent

BLOCK_S = 1.0  # samples are made one second at a time (whole 10 ms chunks)
TEXT_DRIVERS = ("simulated", "serial_lines")
_DUE_TOLERANCE_S = 1e-9  # a line is due when the clock is this close to its time (clock arithmetic rounds)


def source_format(rig: Rig) -> LineFormat:
    """The line layout of the rig's [source] table (driver simulated or serial_lines), columns required.

    Raises:
        ConfigError: another driver, a wrong [source] key, or no columns.
    """
    table = dict(rig.source)
    driver = table.pop("driver", None)
    if driver not in TEXT_DRIVERS:
        raise ConfigError("source.driver", driver, "'simulated' (or 'serial_lines'): a source of text lines the "
                          "simulator can play", rig.source_path)
    fmt = LineFormat.from_source_table(table, rig.source_path)
    if fmt.columns is None:
        raise ConfigError("source.columns", None, "the list of columns: the simulator must know what to send",
                          rig.source_path)
    return fmt


def _field_channels(rig: Rig, fmt: LineFormat) -> dict[str, tuple[int, ChannelSpec]]:
    """Each value column -> (index, channel) of the first channel with a role that reads it."""
    specs = parse_channels(rig, fmt.fields)
    out: dict[str, tuple[int, ChannelSpec]] = {}
    for index, spec in enumerate(specs):
        if spec.role is not None and spec.field not in out:
            out[spec.field] = (index, spec)
    for name in fmt.fields:
        if name not in out:
            raise ConfigError("source.columns", list(fmt.columns or ()), f"columns that [[channels]] with a role read "
                              f"(the simulator needs to know what {name!r} measures)", rig.source_path)
    return out


@dataclass
class SimBlock:
    """One block of the simulation: truth for every sample, the raw table, and the lines actually sent."""

    first_sample: int
    truth: Truth
    raw: np.ndarray  # (samples, columns): what the device measured, in wire units (NaN for a dropout)
    sent: np.ndarray  # bool per sample: False during a link loss
    t_s: np.ndarray  # sample time of each sent line, s since the start
    lines: list[bytes]  # the sent lines, without terminators


class RigSimulator:
    """The simulated rig: call next_block() for the next second of samples.

    Args:
        rig: a rig with [source] (the line layout), [[channels]] (what each column measures and how it is
            calibrated) and optionally [simulation].
        scenario: a scenario name under [simulation.scenarios]; None: the table's default.

    Raises:
        ConfigError: any of those tables is wrong (the message names the key), or the tank's expansion path
            leaves the gas model's range.
    """

    def __init__(self, rig: Rig, scenario: str | None = None):
        self.rig = rig
        self.format = source_format(rig)
        self.field_channels = _field_channels(rig, self.format)
        sent = {spec.name: spec.role for _, spec in self.field_channels.values()}
        self.scenario: Scenario = parse_simulation(rig, sent, scenario)
        path, feed = tank_path(rig), feed_system(rig)
        self.feed = feed
        try:
            sets = droop_set_points_pa(self.scenario, feed.set_pressure_pa, rig.ambient_pressure_pa)
            tables = feed_tables(path, feed, sets)
        except PhysicsError as exc:
            raise ConfigError("tank.expansion", rig.tank.expansion, f"a path the gas model can follow ({exc})",
                              rig.source_path) from exc
        s = self.scenario
        self.truth = TruthModel(tables, path.initial_mass_kg, rig.ambient_pressure_pa, rig.ambient_temperature_k,
                                s.sample_rate_hz, s.feed_time_constant_s)
        self.sensors = SensorBank(self.format, self.field_channels, s, s.seed)
        self.block_samples = self.truth.chunk * max(1, round(BLOCK_S / CHUNK_S))
        self.next_sample = 0

    @property
    def sample_rate_hz(self) -> float:
        return self.scenario.sample_rate_hz

    @property
    def time_s(self) -> float:
        """Time of the next sample to be made, s since the start."""
        return self.next_sample / self.scenario.sample_rate_hz

    def next_block(self, samples: int | None = None) -> SimBlock:
        """The next block of samples (block_samples unless fewer are asked for, e.g. to end a run exactly).

        Blocks cut at whole chunks (multiples of self.truth.chunk samples, 10 ms) give the same lines however
        a run is cut: the mass is integrated per chunk and every random stream runs on across blocks.
        """
        n = self.block_samples if samples is None else max(0, min(int(samples), self.block_samples))
        k0 = self.next_sample
        s = self.scenario
        t = (k0 + np.arange(n)) / s.sample_rate_hz
        leak = np.zeros(n)
        for f in s.faults_of("leak"):
            leak[t >= f.start_s] += f.rate
        truth = self.truth.advance(valve_open(t, s.open_intervals_s),
                                   set_point_pa(t, s, self.feed.set_pressure_pa, self.rig.ambient_pressure_pa), leak)
        raw, sent, empty = self.sensors.raw(truth, k0)
        lines = self.sensors.lines(raw[sent], empty[sent])
        self.next_sample = k0 + n
        return SimBlock(k0, truth, raw, sent, t[sent], lines)

    def blocks(self, duration_s: float) -> Iterator[SimBlock]:
        """Blocks until duration_s (s since the start; the last block is cut to end there)."""
        end = int(round(duration_s * self.scenario.sample_rate_hz))
        while self.next_sample < end:
            yield self.next_block(end - self.next_sample)


def generate_lines(rig: Rig, duration_s: float | None = None, scenario: str | None = None
                   ) -> Iterator[tuple[np.ndarray, list[bytes]]]:
    """The rig's lines as fast as they can be made: (sample time of each line in s, lines) per block.

    Args:
        rig: the rig (see RigSimulator).
        duration_s: how long to simulate, s; None: the scenario's duration.
        scenario: a scenario name, or None for the table's default.
    """
    sim = RigSimulator(rig, scenario)
    for block in sim.blocks(sim.scenario.duration_s if duration_s is None else duration_s):
        yield block.t_s, block.lines


class SimulatedDriver(Driver):
    """The simulated rig as an in-process driver: read() returns the lines whose device time has come.

    Device time runs at `speed` times the injected clock from open(); each line is stamped with the clock
    time at which it came due, so a FakeClock makes a test instant and exact. Lines are read by
    drivers.line_parsing.parse_lines and checked by the serial driver's StreamWatch, so a link loss shows as
    a sequence "gap" event exactly as over a serial port. After duration_s (if given) no more lines come and
    one "lost" event says so.

    Args:
        simulator: the RigSimulator to play.
        clock: the monotonic clock.
        speed: device seconds per clock second (> 0).
        duration_s: end of the run in device time, s, or None to run until closed.
    """

    def __init__(self, simulator: RigSimulator, clock: Clock, speed: float = 1.0, duration_s: float | None = None):
        if not speed > 0.0:
            raise ConfigError("speed", speed, "a positive number of simulated seconds per second")
        self.simulator, self.clock, self.speed, self.duration_s = simulator, clock, float(speed), duration_s
        self.format = simulator.format
        self.fields = self.format.fields
        self._t0: float | None = None
        self._lines: list[bytes] = []
        self._due_s = np.empty(0)  # sample time of each pending line
        self._watch = StreamWatch(self.format.sequence_modulo)
        self._events: list[LinkEvent] = []
        self._ended = False

    @classmethod
    def from_rig(cls, rig: Rig, clock: Clock, port: str | None = None, scenario: str | None = None,
                 speed: float = 1.0) -> Driver:
        """The driver for a rig whose [source] driver is "simulated".

        Given a port (a device path or pyserial URL, such as the pseudo-terminal `ejecta simulate` prints),
        the same line layout is read from that port by the serial driver instead.
        """
        if port is not None:
            table = {k: v for k, v in rig.source.items() if k != "driver"}
            return SerialLinesDriver(LineFormat.from_source_table(table, rig.source_path), clock, url=port)
        return cls(RigSimulator(rig, scenario), clock, speed)

    @property
    def device_time_s(self) -> float:
        """Simulated seconds since open()."""
        return 0.0 if self._t0 is None else (self.clock.now() - self._t0) * self.speed

    def _open(self) -> None:
        if self._t0 is None:
            self._t0 = self.clock.now()
            scenario = self.simulator.scenario.name or "base scenario"
            self._events.append(LinkEvent(self._t0, "connected", f"simulated rig ({scenario}) at "
                                          f"{self.simulator.sample_rate_hz:g} Hz, x{self.speed:g}"))

    def _close(self) -> None:
        self._lines, self._due_s = [], np.empty(0)

    def _make_until(self, device_s: float) -> None:
        end = np.inf if self.duration_s is None else self.duration_s
        sim = self.simulator
        while sim.time_s <= min(device_s, end) and sim.time_s < end:
            left = int(round(end * sim.sample_rate_hz)) - sim.next_sample if end < np.inf else None
            block = sim.next_block(left)
            self._lines.extend(block.lines)
            self._due_s = np.concatenate([self._due_s, block.t_s])

    def _read(self, timeout_s: float) -> RawBatch:
        if self._t0 is None:
            self._open()
        device_s = self.device_time_s
        self._make_until(device_s)
        count = int(np.searchsorted(self._due_s, device_s + _DUE_TOLERANCE_S, side="right"))
        if count == 0 and timeout_s > 0.0:
            self._make_until(device_s + timeout_s * self.speed)
            wait_s = ((self._due_s[0] - device_s) / self.speed) if self._due_s.size else np.inf
            self.clock.sleep(min(timeout_s, wait_s))
            device_s = self.device_time_s
            count = int(np.searchsorted(self._due_s, device_s + _DUE_TOLERANCE_S, side="right"))
        lines, self._lines = self._lines[:count], self._lines[count:]
        due, self._due_s = self._due_s[:count], self._due_s[count:]
        raw = parse_lines(lines, self._t0 + due / self.speed, self.format)
        events, self._events = self._events, []
        events += self._watch.check(raw, self.clock.now())
        if not self._ended and self.duration_s is not None and device_s >= self.duration_s and not self._lines:
            self._ended = True
            events.append(LinkEvent(self.clock.now(), "lost", f"the simulated run ended after {self.duration_s:g} s"))
        raw.events = events
        return raw
