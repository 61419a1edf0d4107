"""Simulated sensors and the microcontroller's text lines: truth -> raw readings -> bytes, one block at a time.

Each sensor reads its channel's ground truth through a first-order lag, converts it to what the device sends
by inverting the channel's own calibration (a 4-20 mA current, a ratiometric voltage, degrees C, SLPM, N),
adds its offset, Gaussian noise and any spikes, and is quantised to its resolution (the ADC step). Faults
then act on the raw values: a stuck sensor repeats its last reading, a dropout sends 'nan' or an empty
field. The line carries the device time and a sequence number; a link loss sends no lines at all, while the
device keeps sampling and counting. Pure: randomness comes from seeded numpy Generators, time from the caller.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
from scipy.signal import lfilter

from drivers.line_format import LineFormat
from drivers.sim_model import Truth
from drivers.sim_scenario import Scenario, SensorSpec
from monitor.calibration import ChannelSpec
from monitor.errors import ConfigError

# Which ground-truth array each channel role reads.
TRUTH_OF_ROLE = {
    "tank_pressure": "tank_pressure_pa", "tank_temperature": "tank_temperature_k",
    "feed_pressure": "feed_pressure_pa", "feed_temperature": "feed_temperature_k",
    "mass_flow": "mass_flow_kg_s", "thrust": "thrust_n", "valve": "valve_open",
}
_AFFINE_KINDS = ("identity", "linear", "current_4_20", "ratiometric")


def inverse_calibration(spec: ChannelSpec, key: str) -> Callable[[np.ndarray], np.ndarray]:
    """value in the channel's unit -> the raw number a sensor sends, inverting spec.calibration.

    Affine kinds are inverted exactly from two points; a table by swapping its columns (clamped at its
    ends), which needs its values strictly monotonic.

    Raises:
        ConfigError: (naming `key`) a polynomial, or a table whose values are not strictly monotonic.
    """
    cal = spec.calibration
    if cal.kind in _AFFINE_KINDS:
        zero, one = (float(cal.apply(np.array([x]))[0][0]) for x in (0.0, 1.0))
        return lambda value: (np.asarray(value, dtype=float) - zero) / (one - zero)
    if cal.kind == "table":
        raw, value = np.array(cal.raw), np.array(cal.value)
        step = np.diff(value)
        if np.all(step < 0.0):
            raw, value = raw[::-1], value[::-1]
        elif not np.all(step > 0.0):
            raise ConfigError(key, list(cal.value), "table values that rise or fall strictly (the simulator "
                              "inverts the table)")
        return lambda v: np.interp(v, value, raw)
    raise ConfigError(key, cal.kind, "a calibration the simulator can invert: " + ", ".join(_AFFINE_KINDS)
                      + ", table")


def decimals(resolution: float) -> int:
    """Digits after the point that show every multiple of `resolution` (at most 9)."""
    if resolution <= 0.0:
        return -1
    d = max(0, math.ceil(-math.log10(resolution) - 1e-9))
    while d < 9 and abs(resolution * 10**d - round(resolution * 10**d)) > 1e-6 * resolution * 10**d:
        d += 1
    return d


class SensorBank:
    """Turns blocks of Truth into the device's raw table (one row per sample, one column per wire column).

    Args:
        fmt: the line format; its columns are the wire columns.
        specs: field name -> the channel that reads it (with a role), for every value column.
        scenario: sensors and faults.
        seed: seeds one random stream per column and one per spike fault, so a seed fixes every line
            whatever the sizes of the blocks asked for.
    """

    def __init__(self, fmt: LineFormat, specs: dict[str, tuple[int, ChannelSpec]], scenario: Scenario,
                 seed: int):
        self.fmt, self.scenario = fmt, scenario
        streams = np.random.SeedSequence(seed).spawn(len(fmt.columns or ()) + len(scenario.faults))
        self._noise = [np.random.default_rng(s) for s in streams[: len(fmt.columns or ())]]
        self._spikes = [np.random.default_rng(s) for s in streams[len(fmt.columns or ()):]]
        self.dt_s = 1.0 / scenario.sample_rate_hz
        self.columns = fmt.columns or ()
        self.scale_s = fmt.device_time_scale_s
        self.sensors: list[tuple[int, ChannelSpec, SensorSpec, Callable]] = []
        self.formats: list[str] = []
        for j, name in enumerate(self.columns):
            if name in (fmt.device_time_field, fmt.sequence_field):
                self.formats.append("%d")
                continue
            index, spec = specs[name]
            sensor = scenario.sensor(spec.name, spec.role)
            if spec.role == "valve" and spec.name not in scenario.sensors:
                sensor = SensorSpec(resolution=1.0)
            inverse = inverse_calibration(spec, f"channels[{index}].calibration")
            self.sensors.append((j, spec, sensor, inverse))
            d = decimals(sensor.resolution)
            self.formats.append("%.7g" if d < 0 else f"%.{d}f")
        self._lag_state: dict[str, float] = {}
        self._last_raw: dict[str, float] = {}
        self._stuck: dict[str, float] = {}

    def raw(self, truth: Truth, first_sample: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The raw table of one block, and per row: sent (False during a link loss), has an empty field.

        Args:
            truth: the block's ground truth.
            first_sample: index of its first sample since the start (for the sequence number).
        """
        n = truth.t_s.size
        t = truth.t_s
        table = np.empty((n, len(self.columns)))
        fmt = self.fmt
        for j, name in enumerate(self.columns):
            if name == fmt.device_time_field:
                table[:, j] = np.round(t / self.scale_s)
            elif name == fmt.sequence_field:
                seq = first_sample + np.arange(n)
                table[:, j] = seq % fmt.sequence_modulo if fmt.sequence_modulo else seq
        empty = np.zeros(n, dtype=bool)
        faults = self.scenario.faults
        for j, spec, sensor, inverse in self.sensors:
            si = np.asarray(getattr(truth, TRUTH_OF_ROLE[spec.role]), dtype=float)
            si = self._lag(spec.name, si, sensor.lag_s, self.dt_s)
            raw = inverse((si - spec.si_offset) / spec.si_scale) + sensor.offset
            if sensor.noise > 0.0:
                raw = raw + sensor.noise * self._noise[j].standard_normal(n)
            for f, stream in zip(faults, self._spikes):
                if f.channel == spec.name and f.kind == "spikes":
                    p = f.rate * self.dt_s  # one uniform draw per sample: a hit below p, negative below p/2
                    u = stream.random(n)
                    hit = (u < p) & (t >= f.start_s) & (t < f.end_s)
                    raw = raw + np.where(hit, np.where(u < 0.5 * p, -f.size, f.size), 0.0)
            if sensor.resolution > 0.0:
                raw = np.round(raw / sensor.resolution) * sensor.resolution
            for f in faults:
                if f.channel != spec.name:
                    continue
                if f.kind == "stuck":
                    raw = self._stick(spec.name, raw, t >= f.start_s)
                elif f.kind == "dropout":
                    gone = (t >= f.start_s) & (t < f.end_s)
                    raw = np.where(gone, np.nan, raw)
                    if f.send == "empty":
                        empty |= gone
            if n:
                self._last_raw[spec.name] = float(raw[-1])
            table[:, j] = raw
        sent = np.ones(n, dtype=bool)
        for f in self.scenario.faults_of("link_loss"):
            sent &= ~((t >= f.start_s) & (t < f.end_s))
        return table, sent, empty

    def _lag(self, name: str, si: np.ndarray, lag_s: float, dt_s: float) -> np.ndarray:
        """First-order lag, starting settled at the first value it sees."""
        if lag_s <= 0.0 or si.size == 0:
            return si
        a = math.exp(-dt_s / lag_s)
        previous = self._lag_state.get(name, float(si[0]))
        out, _ = lfilter([1.0 - a], [1.0, -a], si, zi=[a * previous])
        self._lag_state[name] = float(out[-1])
        return out

    def _stick(self, name: str, raw: np.ndarray, stuck: np.ndarray) -> np.ndarray:
        """From the first stuck sample on, repeat the last reading sent before it."""
        if not stuck.any():
            return raw
        if name not in self._stuck:
            first = int(np.argmax(stuck))
            self._stuck[name] = float(raw[first - 1]) if first > 0 else self._last_raw.get(name, float(raw[0]))
        return np.where(stuck, self._stuck[name], raw)

    def header(self) -> bytes:
        """The column names as the device would print them in a header line."""
        sep = {"csv": ",", "whitespace": " "}.get(self.fmt.layout, ",")
        return sep.join(self.columns).encode("ascii")

    def lines(self, table: np.ndarray, empty: np.ndarray) -> list[bytes]:
        """Format raw rows as the device's lines (without terminators), with checksums if the format has them."""
        n = table.shape[0]
        if n == 0:
            return []
        fmt = self.fmt
        if fmt.layout == "pairs":
            row = ",".join(f"{c}={f}" for c, f in zip(self.columns, self.formats))
        else:
            row = ("," if fmt.layout == "csv" else " ").join(self.formats)
        text = ((row + "\n") * n) % tuple(table.ravel().tolist())
        lines = text.encode("ascii").split(b"\n")[:-1]
        for i in np.flatnonzero(empty).tolist():
            lines[i] = lines[i].replace(b"nan", b"")
        if fmt.checksum == "xor8":
            lengths = np.fromiter(map(len, lines), dtype=np.int64, count=n)
            starts = np.concatenate(([0], np.cumsum(lengths)[:-1]))
            sums = np.bitwise_xor.reduceat(np.frombuffer(b"".join(lines), dtype=np.uint8), starts)
            lines = [b"%s*%02X" % (line, c) for line, c in zip(lines, sums.tolist())]
        return lines
