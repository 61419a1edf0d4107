"""Benchmarks of the whole chain without a screen: throughput against a pandas floor, alert latency, memory.

`ejecta bench` prints what these measure. The chain is the live one: bytes are cut into lines and parsed
(drivers.line_framing, drivers.line_parsing), calibrated (monitor.calibration), estimated and judged for alerts (monitor.engine),
watched for link health and recorded to a run log in a temporary folder.
"""

from __future__ import annotations

import io
import os
import tempfile
import threading
import time
import tty
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from drivers.line_framing import LineSplitter
from drivers.serial_lines import LineParser
from drivers.simulated import source_format
from monitor.calibration import Calibrator, parse_channels
from monitor.clock import MonotonicClock, RunClock
from monitor.config import Rig, parse_rig
from monitor.engine import Engine
from monitor.health import LinkHealth
from monitor.recorder.writer import RunLogWriter
from monitor.rigs import resolve_rig
from monitor.samples import SourceReading

BENCH_RIG = "bench_nitrogen_1l"
STAGES = ("parse", "calibrate", "record", "link health", "engine")  # the chain's stages, in order
# A rule the latency run toggles: the valve channel crossing 0.5 (deadband 0.2, no delays).
LATENCY_RULE = """
[[alerts]]
name = "bench_valve_open"
signal = "valve"
condition = "above"
threshold = 0.5
deadband = 0.2
severity = "advisory"
"""


def bench_rig(extra: str = "") -> Rig:
    """The bundled bench rig (six channels over a csv line), optionally with extra rig-file text appended."""
    path = resolve_rig(BENCH_RIG)
    return parse_rig(path.read_text(encoding="utf-8") + extra, str(path))


def synthetic_lines(count: int, rate_hz: float = 1000.0, seed: int = 3, toggle_s: float = 0.1, first: int = 0) -> bytes:
    """`count` csv lines in the bench rig's layout (t_ms, seq, six sensor fields), valve toggling every toggle_s.

    The values are plausible raw readings (mA, V, C, SLPM, N, valve) with noise; they are invented for the
    benchmark only.
    """
    rng = np.random.default_rng(seed + first)
    index = first + np.arange(count)
    t_ms = index * (1000.0 / rate_hz)
    valve = (np.floor(t_ms / (toggle_s * 1000.0)) % 2).astype(int)
    columns = [
        np.char.mod("%.0f", t_ms),
        np.char.mod("%d", index % 65536),
        np.char.mod("%.3f", 14.6 + 0.004 * rng.standard_normal(count)),
        np.char.mod("%.4f", 0.5 + valve * 2.4 + 0.0015 * rng.standard_normal(count)),
        np.char.mod("%.2f", 20.0 + 0.1 * rng.standard_normal(count)),
        np.char.mod("%.2f", valve * 60.0 + 0.15 * rng.standard_normal(count)),
        np.char.mod("%.3f", 1.85 + valve * 0.55 + 0.003 * rng.standard_normal(count)),
        np.char.mod("%d", valve),
    ]
    rows = columns[0]
    for column in columns[1:]:
        rows = np.char.add(np.char.add(rows, ","), column)
    return ("\n".join(rows.tolist()) + "\n").encode("ascii")


class Chain:
    """The live chain after the serial port: framing, parsing, calibration, link health, engine, recorder."""

    def __init__(self, rig: Rig, log_path: Path | None, clock=None):
        self.clock = clock or RunClock(MonotonicClock())
        fmt = source_format(rig)
        self.splitter = LineSplitter(fmt, mid_stream=False)
        self.parser = LineParser(fmt)
        channels = parse_channels(rig, self.parser.fields)
        self.calibrator = Calibrator(channels, self.parser.fields)
        self.writer = None if log_path is None else RunLogWriter(log_path, rig.text, channels, self.clock)
        self.health = LinkHealth(channels)
        self.engine = Engine(rig, channels, writer=self.writer)
        self.lines = 0
        self.stage_s = dict.fromkeys(STAGES, 0.0)  # seconds spent in each stage so far

    def feed(self, chunk: bytes, t_s: float) -> int:
        """Push bytes received at t_s through the chain; returns the alert transitions it caused.

        The alert transitions the engine writes to the log count as the engine's time, not the recorder's.
        """
        clock = time.perf_counter
        stage = self.stage_s
        start = clock()
        raw = self.parser.parse(self.splitter.feed(chunk, t_s))
        parsed = clock()
        reading = SourceReading(raw, self.calibrator.apply(raw, raw.missing))
        calibrated = clock()
        if self.writer is not None:
            self.writer.on_reading(reading)
        recorded = clock()
        self.health.on_reading(reading)
        watched = clock()
        before = self.engine.transition_count
        self.engine.on_reading(reading)
        stage["parse"] += parsed - start
        stage["calibrate"] += calibrated - parsed
        stage["record"] += recorded - calibrated
        stage["link health"] += watched - recorded
        stage["engine"] += clock() - watched
        self.lines += len(raw)
        return self.engine.transition_count - before

    def close(self) -> None:
        if self.writer is not None:
            self.writer.close()


@dataclass(frozen=True)
class Throughput:
    lines: int
    seconds: float
    floor_seconds: float
    channels: int
    read_lines: int  # lines per read handed to the chain
    stage_seconds: dict[str, float]  # seconds of each stage (STAGES) over the measured lines

    @property
    def lines_per_s(self) -> float:
        return self.lines / self.seconds

    @property
    def samples_per_s(self) -> float:
        return self.lines_per_s * self.channels

    @property
    def floor_lines_per_s(self) -> float:
        return self.lines / self.floor_seconds

    @property
    def floor_ratio(self) -> float:
        """Chain rate over floor rate (the issue's target is 0.5 or more)."""
        return self.lines_per_s / self.floor_lines_per_s

    def per_line_us(self) -> dict[str, float]:
        """Microseconds per line in each stage, and in the floor."""
        out = {k: v / self.lines * 1e6 for k, v in self.stage_seconds.items()}
        out["floor"] = self.floor_seconds / self.lines * 1e6
        return out


def measure_throughput(lines: int = 200_000, chunk_lines: int = 2_000) -> Throughput:
    """Lines per second through the whole chain in reads of chunk_lines, and the floor: pandas.read_csv (C
    engine) of the same bytes in one call."""
    import pandas as pd

    data = synthetic_lines(lines)
    line_len = len(data) / lines
    chunk = int(line_len * chunk_lines)
    with tempfile.TemporaryDirectory() as folder:
        chain = Chain(bench_rig(), Path(folder) / "bench.ejlog")
        chain.feed(data[: chunk * 2], 0.0)  # warm-up: caches, CoolProp tables, filter design
        chain.stage_s = dict.fromkeys(STAGES, 0.0)
        start = time.perf_counter()
        for offset in range(chunk * 2, len(data), chunk):
            chain.feed(data[offset : offset + chunk], offset / len(data))
        seconds = time.perf_counter() - start
        chain.close()
        measured = chain.lines - int(round(2 * chunk / line_len))
    start = time.perf_counter()
    pd.read_csv(io.BytesIO(data), header=None, engine="c", dtype=np.float64).to_numpy()
    floor = (time.perf_counter() - start) * measured / lines
    return Throughput(lines=measured, seconds=seconds, floor_seconds=floor, channels=6, read_lines=chunk_lines,
                      stage_seconds=dict(chain.stage_s))


def measure_alert_latency(seconds: float = 10.0, rate_hz: float = 1000.0) -> np.ndarray:
    """Seconds from a line's arrival on a real pseudo-terminal to the alert change it causes, for each change.

    A writer thread sends the bench stream at rate_hz in real time with the valve toggling every 0.1 s; the
    reader runs the whole chain (incl. recording) on what arrives and notes when each transition comes out.
    """
    warm = int(rate_hz)  # the first second is fed directly, before timing: tables, filters and caches get built
    count = int(seconds * rate_hz) + warm
    data = synthetic_lines(count, rate_hz)
    lines = data.splitlines(keepends=True)
    toggles = [i for i in range(1, count) if lines[i].rstrip().endswith(b",1") != lines[i - 1].rstrip().endswith(b",1")]
    sent_at: dict[int, float] = {}
    master, slave = os.openpty()
    tty.setraw(slave)  # as a serial port is opened: no line discipline, no echo; a read returns what is there
    done = threading.Event()

    def write() -> None:
        start = time.perf_counter()
        toggle_set = set(toggles)
        for i, line in enumerate(lines[warm:], start=warm):
            delay = start + (i - warm) / rate_hz - time.perf_counter()
            if delay > 0:
                time.sleep(delay)
            os.write(master, line)
            if i in toggle_set:
                sent_at[i] = time.perf_counter()
        done.set()

    latencies: list[float] = []
    with tempfile.TemporaryDirectory() as folder:
        chain = Chain(bench_rig(LATENCY_RULE), Path(folder) / "latency.ejlog")
        chain.feed(b"".join(lines[:warm]), time.perf_counter())
        writer = threading.Thread(target=write, daemon=True)
        received = warm
        toggle_iter = iter(t for t in toggles if t >= warm)
        next_toggle = next(toggle_iter, None)
        writer.start()
        os.set_blocking(slave, False)
        while not (done.is_set() and received >= count):
            try:
                chunk = os.read(slave, 65536)
            except BlockingIOError:
                time.sleep(0.0002)
                continue
            received += chunk.count(b"\n")
            changes = chain.feed(chunk, time.perf_counter())
            now = time.perf_counter()
            while changes and next_toggle is not None and next_toggle < received:
                if next_toggle in sent_at:
                    latencies.append(now - sent_at[next_toggle])
                changes -= 1
                next_toggle = next(toggle_iter, None)
        writer.join()
        chain.close()
    os.close(master)
    os.close(slave)
    return np.array(latencies)


def _rss_bytes() -> int:
    with open("/proc/self/statm") as statm:
        return int(statm.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")


def measure_memory(hours: float = 1.0, rate_hz: float = 1000.0, chunk_s: float = 0.25) -> tuple[float, float, float]:
    """RSS growth (bytes) over `hours` of rate_hz data pushed through the chain as fast as possible, in reads of
    chunk_s of data each, recorded to a temporary run log deleted afterwards.

    Returns (RSS growth after a minute of warm-up, seconds spent in the chain, bytes of run log written).
    """
    per_chunk = int(round(rate_hz * chunk_s))
    block_chunks = int(round(60.0 / chunk_s))  # make a minute of lines at a time
    total_chunks = int(hours * 3600.0 / chunk_s)
    seconds, base, done = 0.0, None, 0
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "hour.ejlog"
        chain = Chain(bench_rig(), path)
        while done < total_chunks:
            data = synthetic_lines(per_chunk * block_chunks, rate_hz, first=done * per_chunk)
            step = len(data) // block_chunks
            start = time.perf_counter()
            for k in range(block_chunks):
                cut = data.rfind(b"\n", 0, (k + 1) * step) + 1 if k < block_chunks - 1 else len(data)
                begin = data.rfind(b"\n", 0, k * step) + 1 if k else 0
                chain.feed(data[begin:cut], (done + k + 1) * chunk_s)
            seconds += time.perf_counter() - start
            done += block_chunks
            if base is None:  # after the first minute: buffers have reached their bounded sizes
                base, seconds = _rss_bytes(), 0.0
        growth = _rss_bytes() - base
        chain.close()
        size = path.stat().st_size
    return float(growth), seconds, float(size)
