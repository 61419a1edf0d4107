"""The pipeline's fan-out keeps going past a failing listener; link health counts rates, staleness, bad lines and gaps."""

from dataclasses import dataclass

import numpy as np
import pytest

from drivers.base import LineStatus, RawBatch
from monitor.clock import FakeClock
from monitor.health import LinkHealth
from monitor.pipeline import Pipeline
from monitor.samples import Batch, LinkEvent, Quality, SourceReading
from monitor.sources.base import SampleSource


@dataclass(frozen=True)
class Spec:
    name: str
    stale_after_s: float


def _reading(t_s, status=None, sequence=None, quality=None, events=()):
    n = t_s.size
    status = np.zeros(n, dtype=np.uint8) if status is None else status
    ok = status == 0
    k = int(ok.sum())
    q = np.zeros(k, dtype=np.uint8) if quality is None else quality
    raw = RawBatch(t_s=t_s, lines=[b"x"] * n, status=status, fields=(), values=np.empty((n, 0)), events=list(events))
    batch = Batch(t_s=t_s[ok], values={"p": np.ones(k)}, quality={"p": q}, sequence=None if sequence is None else sequence[ok])
    return SourceReading(raw, batch)


class ListSource(SampleSource):
    def __init__(self, readings):
        self.readings = list(readings)

    def read(self, timeout_s=0.05):
        return self.readings.pop(0) if self.readings else None


class Broken:
    def on_reading(self, reading):
        raise RuntimeError("display bug")

    def stop(self):
        raise RuntimeError("stop bug")


class Counting:
    def __init__(self):
        self.n, self.ticks, self.stopped = 0, 0, False

    def on_reading(self, reading):
        self.n += len(reading.batch)

    def tick(self, now_s):
        self.ticks += 1

    def stop(self):
        self.stopped = True


def test_a_failing_listener_does_not_stop_the_others():
    counting = Counting()
    pipeline = Pipeline(ListSource([_reading(np.arange(5.0)), _reading(np.arange(5.0, 8.0))]), [Broken(), counting], FakeClock())
    pipeline.run()
    pipeline.stop()
    assert counting.n == 8 and counting.stopped and counting.ticks == 3
    assert pipeline.finished and pipeline.readings == 2
    assert [f.message for f in pipeline.failures] == ["on_reading: RuntimeError: display bug"] * 2 + [
        "stop: RuntimeError: stop bug"
    ]


def test_rate_age_and_staleness():
    health = LinkHealth((Spec("p", 0.5),), window_s=1.0)
    health.on_reading(_reading(np.arange(0.0, 2.0, 0.01)))  # 100 Hz for 2 s
    snap = health.snapshot(2.0)
    assert snap.channels[0].rate_hz == pytest.approx(100.0, rel=0.02)
    assert snap.channels[0].age_s == pytest.approx(0.01, abs=1e-9) and not snap.channels[0].stale
    later = health.snapshot(2.6)  # the last 1 s window holds the samples from 1.6 s to 1.99 s
    assert later.channels[0].stale and later.channels[0].rate_hz == pytest.approx(40.0, rel=0.03)
    assert health.snapshot(3.5).channels[0].rate_hz == 0.0


def test_bad_lines_flags_gaps_and_link_events():
    health = LinkHealth((Spec("p", 1.0),))
    status = np.array([0, LineStatus.GARBAGE, 0, LineStatus.CHECKSUM, 0, 0], dtype=np.uint8)
    seq = np.array([1, -1, 2, -1, 5, 6])  # 3 and 4 never arrived
    quality = np.array([0, Quality.NON_FINITE, 0, 0], dtype=np.uint8)
    health.on_reading(_reading(np.arange(6.0), status, seq, quality, events=[LinkEvent(5.5, "lost")]))
    health.on_reading(_reading(np.array([9.0]), sequence=np.array([9]), events=[LinkEvent(8.9, "connected")]))
    snap = health.snapshot(9.0)
    assert snap.bad_lines == {"garbage": 1, "checksum": 1} and snap.bad_line_total == 2
    assert snap.sequence_gaps == 2 + 2
    assert snap.channels[0].bad_samples == 1
    assert snap.link_up and snap.link_losses == 1
    assert [e.kind for e in snap.recent_events] == ["lost", "connected"]
    assert snap.event_counts == {"lost": 1, "connected": 1}
