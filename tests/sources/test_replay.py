"""Replay of a run log: pacing on an injected clock, bit-for-bit samples, seek, step, gaps and events."""

import math

import numpy as np
import pytest

from drivers.base import LineStatus, RawBatch
from monitor.clock import FakeClock
from monitor.recorder import ChannelColumn, RunLogWriter
from monitor.samples import Batch, LinkEvent, Quality, SourceReading
from monitor.sources.replay import Pacer, ReplaySource

CHANNELS = (ChannelColumn("tank_pressure", "pressure"), ChannelColumn("thrust", "force"))


def _reading(t_s, rng, bad_every=7, events=()):
    n = t_s.size
    status = np.zeros(n, dtype=np.uint8)
    status[::bad_every] = LineStatus.GARBAGE
    ok = status == 0
    lines = [f"{t:.6f},x".encode() for t in t_s]
    raw = RawBatch(t_s=t_s, lines=lines, status=status, fields=(), values=np.empty((n, 0)), events=list(events))
    k = int(ok.sum())
    quality = np.zeros(k, dtype=np.uint8)
    quality[::5] = Quality.OUT_OF_RANGE
    pressure = rng.normal(2e7, 1e5, k)
    pressure[quality != 0] = np.nan
    batch = Batch(
        t_s=t_s[ok],
        values={"tank_pressure": pressure, "thrust": rng.normal(0.5, 0.01, k)},
        quality={"tank_pressure": quality, "thrust": np.zeros(k, dtype=np.uint8)},
        device_time_s=t_s[ok] - 0.001,
        sequence=np.flatnonzero(ok).astype(np.int64),
    )
    return SourceReading(raw=raw, batch=batch)


@pytest.fixture
def recorded(tmp_path):
    """A 10 s log at 100 lines/s with a 5 s silence in the middle and two link events."""
    rng = np.random.default_rng(7)
    clock = FakeClock()
    path = tmp_path / "run.ejlog"
    readings = [
        _reading(np.arange(0.0, 3.0, 0.01), rng, events=[LinkEvent(0.0, "connected")]),
        _reading(np.arange(8.0, 10.0, 0.01), rng, events=[LinkEvent(7.5, "connected", "back")]),
    ]
    with RunLogWriter(path, "format = 1\n", CHANNELS, clock) as writer:
        for r in readings:
            writer.on_reading(r)
    return path, Batch.concat([r.batch for r in readings])


def _drain(source, timeout_s=0.05):
    got = []
    while (r := source.read(timeout_s)) is not None:
        got.append(r)
    return got


def test_flat_out_replay_gives_back_every_sample_bit_for_bit(recorded):
    path, truth = recorded
    source = ReplaySource(path, FakeClock(), speed=math.inf)
    readings = _drain(source)
    got = Batch.concat([r.batch for r in readings])
    assert got.t_s.tobytes() == truth.t_s.tobytes()
    for name in truth.values:
        assert got.values[name].tobytes() == truth.values[name].tobytes()
        assert np.array_equal(got.quality[name], truth.quality[name])
    assert np.array_equal(got.sequence, truth.sequence)
    statuses = np.concatenate([r.raw.status for r in readings])
    assert np.count_nonzero(statuses == LineStatus.GARBAGE) == 300 // 7 + 1 + 200 // 7 + 1
    assert [e.detail for r in readings for e in r.raw.events] == ["", "back"]


def test_real_time_replay_hands_out_only_what_is_due(recorded):
    path, _ = recorded
    clock = FakeClock(100.0)
    source = ReplaySource(path, clock, speed=1.0)
    first = source.read(timeout_s=0.0)
    assert len(first.raw) == 1  # only the line stamped 0.0 is due at the start
    clock.advance(1.0)
    second = source.read(timeout_s=0.0)
    assert second.raw.t_s[-1] <= 1.0 + 1e-12 and second.raw.t_s[-1] > 0.98
    before = clock.now()
    source.read(timeout_s=0.5)  # the next line is due 10 ms later: the pacer sleeps for it, no longer
    assert clock.now() - before == pytest.approx(0.01, abs=1e-9)


def test_speed_pause_seek_and_step(recorded):
    path, _ = recorded
    clock = FakeClock()
    source = ReplaySource(path, clock, speed=10.0)
    source.read(0.0)
    clock.advance(0.1)  # 1 s of log time at 10x
    assert source.read(0.0).raw.t_s[-1] == pytest.approx(1.0, abs=1e-9)
    source.pacer.pause()
    clock.advance(5.0)
    assert len(source.read(0.0).raw) == 0  # paused: nothing new however long we wait
    stepped = source.step(3)
    assert len(stepped.raw) == 3 and stepped.raw.t_s[0] == pytest.approx(1.01)
    source.seek(8.5)
    source.pacer.resume()
    after_seek = source.read(0.05)
    assert 8.5 - 1e-9 <= after_seek.raw.t_s[0] <= 8.51  # arange puts the 8.5 s line a hair below 8.5


def test_long_silences_can_be_skipped(recorded):
    path, _ = recorded
    clock = FakeClock()
    source = ReplaySource(path, clock, speed=1.0, max_gap_s=0.5)
    _drain(source)
    # 3 s + 2 s of data; the 5 s silence is skipped, so the replay takes about 5 s of clock time, not 10.
    assert 4.9 < clock.now() < 5.6


def test_pacer_rejects_nonsense_speeds():
    with pytest.raises(ValueError):
        Pacer(FakeClock(), speed=0.0)
    pacer = Pacer(FakeClock(), speed=math.inf)
    assert pacer.position_s() == math.inf
