"""The review's chunked log reader: the same samples, statuses and events as a whole-log replay, in any chunk
size; note scanning across block edges; errors and early exits of the background reader."""

import math
import threading

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from test_replay import recorded  # noqa: F401  (fixture: a log with bad lines, a silence and two events)

from drivers.base import LineStatus
from monitor.clock import FakeClock
from monitor.errors import LogFormatError
from monitor.recorder import RunLog
from monitor.recorder.reader import _note_lines
from monitor.samples import Batch
from monitor.sources.log_stream import LogStream, prefetched
from monitor.sources.replay import ReplaySource


def _whole(path):
    source = ReplaySource(path, FakeClock(), speed=math.inf, max_rows=10**9)
    readings = list(source)
    return source, readings


@pytest.mark.parametrize("chunk_rows", [1, 7, 100, 10_000])
def test_chunks_carry_what_a_whole_replay_carries(recorded, chunk_rows):  # noqa: F811
    path, written = recorded
    whole, whole_readings = _whole(path)
    stream = LogStream(RunLog.open(path), chunk_rows=chunk_rows)
    assert (stream.start_s, stream.end_s) == (whole.start_s, whole.end_s)
    readings = list(stream)
    batch = Batch.concat([r.batch for r in readings if len(r.batch)])
    np.testing.assert_array_equal(batch.t_s, written.t_s)
    for name in written.values:
        np.testing.assert_array_equal(batch.values[name], written.values[name])  # bit for bit, NaN included
        np.testing.assert_array_equal(batch.quality[name], written.quality[name])
    np.testing.assert_array_equal(batch.sequence, written.sequence)
    status = np.concatenate([r.raw.status for r in readings])
    np.testing.assert_array_equal(status, np.concatenate([r.raw.status for r in whole_readings]))
    assert (status == LineStatus.GARBAGE).sum() > 0
    events = [e for r in readings for e in r.raw.events]
    assert [(e.t_s, e.kind, e.detail) for e in events] == [(0.0, "connected", ""), (7.5, "connected", "back")]
    assert stream.delivered_s == stream.end_s


def test_an_event_rides_with_the_first_reading_at_or_after_it(recorded):  # noqa: F811
    path, _ = recorded
    for reading in LogStream(RunLog.open(path), chunk_rows=50):
        for event in reading.raw.events:
            assert reading.raw.t_s.size == 0 or event.t_s <= reading.raw.t_s[-1]


def test_a_damaged_row_raises_in_the_consumer_after_the_chunks_before_it(recorded):  # noqa: F811
    path, written = recorded
    text = path.read_bytes().splitlines(keepends=True)
    text[-100] = b"s,not a number,,,,,,,ok,\"x\"\n"
    path.write_bytes(b"".join(text))
    got = 0
    with pytest.raises(LogFormatError, match="not a valid run log row"):
        for reading in LogStream(RunLog.open(path), chunk_rows=100):
            got += len(reading.batch)
    assert 0 < got < len(written)


def test_leaving_early_stops_the_reader_thread(recorded):  # noqa: F811
    path, _ = recorded
    before = threading.active_count()
    for _ in LogStream(RunLog.open(path), chunk_rows=1):
        break
    assert threading.active_count() == before


def test_prefetched_hands_on_the_producers_error():
    def produce():
        yield 1
        raise ValueError("broken at two")

    got = []
    with pytest.raises(ValueError, match="broken at two"):
        for item in prefetched(produce):
            got.append(item)
    assert got == [1]


@settings(max_examples=60, deadline=None)
@given(rows=st.lists(st.tuples(st.sampled_from("sbea"), st.text("xyz,0123", max_size=40)), max_size=40),
       block=st.integers(1, 64))
def test_note_scan_finds_every_note_row_whatever_the_block_size(tmp_path_factory, rows, block):
    body = b"\n" + b"".join(f"{k},{text}\n".encode() for k, text in rows)
    path = tmp_path_factory.mktemp("scan") / "body"
    path.write_bytes(b"#header" + body)
    start = len(b"#header")
    expected, offset = [], start + 1
    for k, text in rows:
        line = f"{k},{text}".encode()
        if k in "ea":
            expected.append((offset, line))
        offset += len(line) + 1
    with open(path, "rb") as f:
        assert list(_note_lines(f, b"ea", start, len(b"#header") + len(body), block=block)) == expected
        assert list(_note_lines(f, b"e", start, len(b"#header") + len(body), block=block)) == [
            x for x in expected if x[1][:1] == b"e"]
