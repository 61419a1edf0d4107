"""Run log: write then read back bit for bit, the escape rule, notes, refusal to overwrite, flush/fsync timing,
truncated and damaged files, and reading the body with plain pandas.

The expected values here come from the format's own specification, docs/run-log.md (the escape table, the
header layout), from IEEE 754 binary64 (the bit patterns compared) and from RFC 4180 (CSV quoting, as read by
pandas.read_csv); nothing is compared with numbers the code under test produced itself.
"""

from __future__ import annotations

import os
import tempfile
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import monitor
from drivers.base import LineStatus, RawBatch
from monitor.clock import FakeClock
from monitor.errors import ConfigError, LogFormatError, MonitorError
from monitor.recorder import ChannelColumn, RunLog, RunLogWriter, escape_bytes, unescape_text, writer
from monitor.samples import Batch, LinkEvent, SourceReading

RIG_TEXT = (Path(monitor.__file__).parent / "rigs" / "bench_nitrogen_1l.toml").read_text(encoding="utf-8")
CHANNELS = (ChannelColumn("tank_pressure", "pressure"), ChannelColumn("thrust", "force"))
START = datetime(2025, 3, 1, 10, 15, 2, 123456, tzinfo=timezone.utc)


def reading(t_s, lines, status, values, quality=None, device=None, seq=None, events=()) -> SourceReading:
    """A SourceReading as a driver plus calibration would hand it over: one sample per OK line."""
    t_s = np.asarray(t_s, dtype=float)
    status = np.asarray(status, dtype=np.uint8)
    ok = status == LineStatus.OK
    n_ok = int(ok.sum())
    quality = quality or {c.name: np.zeros(n_ok, np.uint8) for c in CHANNELS}
    raw = RawBatch(t_s=t_s, lines=list(lines), status=status, fields=("a", "b"),
                   values=np.full((len(lines), 2), np.nan),
                   device_time_s=None if device is None else np.asarray(device, dtype=float),
                   sequence=None if seq is None else np.asarray(seq, dtype=np.int64), events=list(events))
    batch = Batch(t_s=t_s[ok], values={k: np.asarray(v, dtype=float) for k, v in values.items()},
                  quality={k: np.asarray(v, dtype=np.uint8) for k, v in quality.items()},
                  device_time_s=None if device is None else np.asarray(device, dtype=float)[ok],
                  sequence=None if seq is None else np.asarray(seq, dtype=np.int64)[ok])
    return SourceReading(raw, batch)


def same_bits(a: np.ndarray, b: np.ndarray) -> bool:
    """Equal as IEEE 754 binary64 bit patterns, except that any NaN equals any NaN (payloads are not kept)."""
    a, b = np.asarray(a, dtype=np.float64), np.asarray(b, dtype=np.float64)
    if a.shape != b.shape or not np.array_equal(np.isnan(a), np.isnan(b)):
        return False
    keep = ~np.isnan(a)
    return bool(np.array_equal(a[keep].view(np.int64), b[keep].view(np.int64)))


@pytest.fixture
def clock() -> FakeClock:
    return FakeClock(100.0)


def new_writer(path, clock, **kw) -> RunLogWriter:
    return RunLogWriter(path, RIG_TEXT, CHANNELS, clock, rig_source="bench_nitrogen_1l.toml",
                        started_utc=START, **kw)


# Floats that stress a text format: signed zeros, subnormals, the extremes, long and short decimals, inf, NaN.
_FLOATS = st.floats(allow_nan=True, allow_infinity=True, allow_subnormal=True, width=64)


class TestRoundTrip:
    """What goes into the writer comes back out of the reader, bit for bit and byte for byte."""

    @settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(rows=st.lists(st.tuples(_FLOATS, _FLOATS, st.integers(0, 15), st.sampled_from([0, 0, 0, 1, 3, 4]),
                                   st.binary(max_size=40)), min_size=1, max_size=300),
           cut=st.integers(1, 300))
    def test_samples_and_raw_bytes(self, rows, cut):
        status = np.array([r[3] for r in rows], dtype=np.uint8)
        ok = status == 0
        t_s = np.cumsum(np.full(len(rows), 1e-3)) + 0.1
        p = np.array([r[0] for r in rows])[ok]
        f = np.array([r[1] for r in rows])[ok]
        q = np.array([r[2] for r in rows], dtype=np.uint8)[ok]
        lines = [r[4] for r in rows]
        device = np.where(np.arange(len(rows)) % 7 == 3, np.nan, t_s * 0.5)
        seq = np.where(np.arange(len(rows)) % 5 == 2, -1, np.arange(len(rows)) + 2**40)
        whole = reading(t_s, lines, status, {"tank_pressure": p, "thrust": f},
                        {"tank_pressure": q, "thrust": q[::-1].copy()}, device, seq)
        with tempfile.TemporaryDirectory() as tmp:
            path = Path(tmp) / "run.ejlog"
            with new_writer(path, FakeClock()) as w:  # the same rows, in two readings
                for lo, hi in ((0, min(cut, len(rows))), (min(cut, len(rows)), len(rows))):
                    part = slice(lo, hi)
                    ok_part = slice(int(ok[:lo].sum()), int(ok[:hi].sum()))
                    w.on_reading(reading(t_s[part], lines[part], status[part],
                                         {k: v[ok_part] for k, v in whole.batch.values.items()},
                                         {k: v[ok_part] for k, v in whole.batch.quality.items()},
                                         device[part], seq[part]))
            log = RunLog.open(path)
            s = log.samples()
            raw = log.raw_lines()
            replay = list(log.batches(17))
        assert log.truncated_lines == 0
        assert same_bits(s["t_s"], t_s[ok])
        assert same_bits(s["tank_pressure_pa"], p) and same_bits(s["thrust_n"], f)
        assert same_bits(s["device_t_s"], device[ok])
        assert np.array_equal(s["seq"], seq[ok])
        assert np.array_equal(s["tank_pressure_q"], q) and np.array_equal(s["thrust_q"], q[::-1])
        assert raw.lines == lines
        assert np.array_equal(raw.status, status)
        assert same_bits(raw.t_s, t_s)
        assert [len(b) for b in replay] == [17] * (int(ok.sum()) // 17) + ([int(ok.sum()) % 17] if ok.sum() % 17 else [])
        for k, b in enumerate(replay):
            part = slice(17 * k, 17 * k + len(b))
            assert same_bits(b.values["tank_pressure"], p[part]) and same_bits(b.values["thrust"], f[part])
            assert same_bits(b.t_s, t_s[ok][part]) and np.array_equal(b.quality["tank_pressure"], q[part])
            # a Batch with no sequence number (device time) at all comes back with None there
            want_seq, want_dev = seq[ok][part], device[ok][part]
            if (want_seq >= 0).any():
                assert np.array_equal(b.sequence, want_seq)
            else:
                assert b.sequence is None
            if (~np.isnan(want_dev)).any():
                assert same_bits(b.device_time_s, want_dev)
            else:
                assert b.device_time_s is None

    def test_awkward_bytes_and_values(self, tmp_path, clock):
        # Control bytes, CSV's own specials (RFC 4180: comma, double quote, CR, LF), backslashes that look
        # like escapes, and bytes that are not UTF-8 (0xff, a lone continuation byte 0x80).
        lines = [b"1,2\r", b"\x00\x01\x1f\x7f", b'say "hi", twice', b"\\x22 and \\\\n", b"\xff\x80\xfe\xc3(",
                 b"", b"NA", b"nan", b"#,#", b"\t\n"]
        status = [0, 1, 0, 3, 0, 6, 0, 0, 0, 0]
        values = {"tank_pressure": [-0.0, 5e-324, np.nan, 1.7976931348623157e308, 0.1, 1e22, -np.inf],
                  "thrust": [0.30000000000000004, np.inf, 1 / 3, -2.2250738585072014e-308, 123456789.0, 0.0, 1e-7]}
        path = tmp_path / "run.ejlog"
        with new_writer(path, clock) as w:
            w.on_reading(reading(np.arange(10) * 0.25, lines, status, values))
        log = RunLog.open(path)
        assert [line for _, line, _ in log.raw_lines()] == lines
        assert [s for _, _, s in log.raw_lines()] == [LineStatus(c) for c in status]
        s = log.samples()
        for name, column in (("tank_pressure", "tank_pressure_pa"), ("thrust", "thrust_n")):
            assert same_bits(s[column], values[name])
        assert str(s["tank_pressure_pa"][0]) == "-0.0"  # the sign of zero survives (IEEE 754 -0.0)
        assert s["seq"].tolist() == [-1] * 7 and s["device_t_s"].isna().all()

    def test_header_round_trip(self, tmp_path, clock):
        rig = 'name = "café, \\"quoted\\""\r\n\tpath = "C:\\\\dev"\r\nlast = 1'  # CRLF, tab, no final newline
        path = tmp_path / "run.ejlog"
        RunLogWriter(path, rig, CHANNELS, clock, rig_source="/rigs/a b.toml", started_utc=START,
                     extra=[("imported-from", "other, \"system\".csv")]).close()
        h = RunLog.open(path).header
        assert h.rig_text == rig and h.rig_source == "/rigs/a b.toml"
        assert h.software == f"ejecta {monitor.__version__}"
        assert h.started_utc == START and h.started_t_s == 100.0
        assert [(c.name, c.column, c.unit) for c in h.channels] == [
            ("tank_pressure", "tank_pressure_pa", "Pa"), ("thrust", "thrust_n", "N")]
        assert h.extra == (("imported-from", "other, \"system\".csv"),)
        text = path.read_bytes()
        assert text.isascii()
        # docs/run-log.md: no header line holds a double quote, so no CSV reader can see a quoted field there
        assert all(b'"' not in line for line in text.split(b"\n") if line.startswith(b"#"))
        assert text.startswith(b"# ejecta-run-log 1\n# header-lines: ")
        assert b"# started-utc: 2025-03-01T10:15:02.123456Z\n" in text

    def test_notes_are_placed_in_time(self, tmp_path, clock):
        events = [LinkEvent(0.15, "gap", "2 lines lost, seq 3-4"), LinkEvent(0.0, "connected", "/dev/ttyACM0")]
        path = tmp_path / "run.ejlog"
        with new_writer(path, clock) as w:
            w.on_reading(reading([0.1, 0.2, 0.3], [b"a", b"b", b"c"], [0, 0, 0],
                                 {"tank_pressure": [1.0, 2.0, 3.0], "thrust": [4.0, 5.0, 6.0]}, events=events))
            w.write_alert(0.35, "tank pressure below 10 bar gauge (regulator inlet minimum)", "raised")
            w.write_event(0.4, "lost", "device unplugged")
            w.write_note("m", 0.5, "operator", "valve opened by hand")
        assert w.rows == 8 and w.closed
        log = RunLog.open(path)
        kinds = pd.read_csv(path, skiprows=log.header_lines, keep_default_na=False)["kind"].tolist()
        assert kinds == ["e", "s", "e", "s", "s", "a", "e", "m"]
        assert log.events() == [LinkEvent(0.0, "connected", "/dev/ttyACM0"), events[0],
                                LinkEvent(0.4, "lost", "device unplugged")]
        assert [(a.t_s, a.label, a.text) for a in log.alerts()] == [
            (0.35, "raised", "tank pressure below 10 bar gauge (regulator inlet minimum)")]
        assert log.notes("m")[0].text == "valve opened by hand"

    def test_a_run_that_recorded_nothing(self, tmp_path, clock):
        path = tmp_path / "empty.ejlog"
        new_writer(path, clock).close()
        log = RunLog.open(path)
        assert len(log.samples()) == 0 and list(log.samples().columns)[:3] == ["t_s", "device_t_s", "seq"]
        assert list(log.batches(10)) == [] and len(log.raw_lines()) == 0 and log.notes() == []

    def test_batches_cover_the_samples(self, tmp_path, clock):
        path = tmp_path / "run.ejlog"
        n = 1000
        with new_writer(path, clock) as w:
            for k in range(4):
                t = k * n + np.arange(n, dtype=float)
                w.on_reading(reading(t, [b"x"] * n, np.zeros(n), {"tank_pressure": t * 3.0, "thrust": -t}))
        sizes = [len(b) for b in RunLog.open(path).batches(300, chunk_rows=700)]
        assert sizes == [300] * 13 + [100]
        joined = Batch.concat(list(RunLog.open(path).batches(300, chunk_rows=700)))
        assert np.array_equal(joined.t_s, np.arange(4 * n, dtype=float))
        assert joined.device_time_s is None and joined.sequence is None
        whole = RunLog.open(path).samples()
        assert whole.equals(RunLog.open(path).samples(chunk_rows=700)) and len(whole) == 4 * n


class TestEscape:
    """The one escape rule of docs/run-log.md, byte by byte."""

    def test_every_byte(self):
        for b in range(256):
            if b == 0x5C:
                expected = "\\\\"
            elif b in (0x09, 0x0A, 0x0D):
                expected = {0x09: "\\t", 0x0A: "\\n", 0x0D: "\\r"}[b]
            elif 0x20 <= b <= 0x7E and b != 0x22:
                expected = chr(b)
            else:
                expected = "\\x" + format(b, "02x")
            assert escape_bytes(bytes([b])) == expected, b
            assert unescape_text(expected) == bytes([b])
            if expected.startswith("\\x"):  # hex digits in either case
                assert unescape_text("\\x" + expected[2:].upper()) == bytes([b])

    @given(st.binary(max_size=200))
    def test_round_trip(self, data):
        text = escape_bytes(data)
        assert text.isascii() and '"' not in text and "\n" not in text and "\r" not in text
        assert unescape_text(text) == data

    @pytest.mark.parametrize("text", ["\\", "a\\q", "\\x4", "\\xzz", "é", "end\\"])
    def test_refuses_what_it_never_writes(self, text):
        with pytest.raises(ValueError):
            unescape_text(text)


class TestCrashSafety:
    def test_refuses_to_overwrite(self, tmp_path, clock):
        path = tmp_path / "run.ejlog"
        path.write_bytes(b"an earlier run\n")
        with pytest.raises(ConfigError, match="run.ejlog"):
            new_writer(path, clock)
        assert path.read_bytes() == b"an earlier run\n"

    def test_rows_reach_the_file_before_the_call_returns(self, tmp_path, clock):
        path = tmp_path / "run.ejlog"
        w = new_writer(path, clock)
        w.on_reading(reading([0.5], [b"12.5,3"], [0], {"tank_pressure": [2e5], "thrust": [3.0]}))
        assert path.read_bytes().endswith(b'ok,"12.5,3"\n')  # read through another handle, writer still open
        w.close()

    def test_fsync_at_most_a_second_apart(self, tmp_path, monkeypatch, clock):
        synced: list[float] = []
        real_fsync = os.fsync
        monkeypatch.setattr(writer.os, "fsync", lambda fd: (synced.append(clock.now()), real_fsync(fd)))
        w = new_writer(tmp_path / "run.ejlog", clock)
        assert synced[0] == 100.0  # the header is made durable at once
        del synced[:]
        one = reading([0.0], [b"x"], [0], {"tank_pressure": [1.0], "thrust": [1.0]})
        clock.advance(0.5)
        w.on_reading(one)
        w.tick()
        assert synced == []
        clock.advance(0.5)
        w.on_reading(one)
        assert synced == [101.0]
        clock.advance(0.7)
        w.tick()
        assert synced == [101.0]
        clock.advance(0.3)
        w.tick()
        assert synced == [101.0, 102.0]
        w.stop()  # a pipeline listener's end: flush, fsync, close
        assert len(synced) == 3 and w.closed
        with pytest.raises(MonitorError, match="closed"):
            w.on_reading(one)

    def test_truncated_last_line_is_ignored_with_a_warning(self, tmp_path, clock):
        path = tmp_path / "run.ejlog"
        with new_writer(path, clock) as w:
            for k in range(3):
                w.on_reading(reading([float(k)], [b"%d" % k], [0], {"tank_pressure": [k * 1e5], "thrust": [1.0]}))
        whole = path.read_bytes()
        cut = whole.rindex(b"200000.0") + 4  # inside the last row: "2000" could pass for a number
        path.write_bytes(whole[:cut])
        log = RunLog.open(path)
        assert log.truncated_lines == 1 and "unfinished" in log.warnings[0]
        assert log.samples()["tank_pressure_pa"].tolist() == [0.0, 1e5]
        path.write_bytes(whole[:whole.rindex(b"\n", 0, len(whole) - 1) + 1])  # cut exactly at a line end
        log = RunLog.open(path)
        assert log.truncated_lines == 0 and len(log.samples()) == 2

    def test_power_cut_zero_fill_at_the_end(self, tmp_path, clock):
        # A file system may show the unwritten tail of a file as zero bytes after a power cut.
        path = tmp_path / "run.ejlog"
        with new_writer(path, clock) as w:
            w.on_reading(reading([1.0], [b"1"], [0], {"tank_pressure": [1.0], "thrust": [1.0]}))
        with open(path, "ab") as f:
            f.write(b"s,2.0,,,4\x00\x00" + b"\x00" * 4000)
        log = RunLog.open(path)
        assert log.truncated_lines == 1 and len(log.samples()) == 1


def _damaged(tmp_path, clock, edit) -> Path:
    path = tmp_path / "run.ejlog"
    with new_writer(path, clock) as w:
        w.on_reading(reading([1.0], [b"1"], [0], {"tank_pressure": [1.0], "thrust": [1.0]}))
    lines = path.read_bytes().split(b"\n")
    path.write_bytes(b"\n".join(edit(lines)))
    return path


class TestRefusesWhatItCannotRead:
    def test_not_a_run_log(self, tmp_path):
        path = tmp_path / "other.csv"
        path.write_text("time,pressure\n0,1\n")
        with pytest.raises(LogFormatError, match=r"other\.csv, line 1: not an ejecta run log"):
            RunLog.open(path)

    def test_newer_version(self, tmp_path, clock):
        path = _damaged(tmp_path, clock, lambda ls: [b"# ejecta-run-log 2"] + ls[1:])
        with pytest.raises(LogFormatError, match=r"run\.ejlog, line 1: run log format 2 .*newer"):
            RunLog.open(path)

    @pytest.mark.parametrize("edit, line, words", [
        (lambda ls: [ls[0], b"# header-lines: 7"] + ls[2:], 7, "end-header"),
        (lambda ls: ls[:3] + [b"this line lost its hash"] + ls[4:], 4, "expected '# key: value'"),
        (lambda ls: ls[:3] + [b"# started-utc: yesterday"] + ls[4:], None, "start time"),
        (lambda ls: ls[:5] + [b"# channel: thrust_n thrust force lbf"] + ls[6:], 6, "channel line"),
        (lambda ls: ls[:8] + [b"# rig: bad \\q escape"] + ls[9:], 9, "escaped"),
        (lambda ls: ls[:3], 3, "ends inside the header"),
    ])
    def test_damaged_header(self, tmp_path, clock, edit, line, words):
        # header lines: 1 magic, 2 header-lines, 3 software, 4 started-utc, 5 started-t-s, 6 rig-source,
        # 7-8 channels, 9... rig lines, then end-header (docs/run-log.md)
        path = _damaged(tmp_path, clock, edit)
        with pytest.raises(LogFormatError) as err:
            RunLog.open(path)
        message = str(err.value)
        assert message.startswith(f"{path}, line ") and words in message
        if line is not None:
            assert f", line {line}:" in message

    def test_column_row_must_match_the_channels(self, tmp_path, clock):
        def edit(lines):
            row = next(i for i, line in enumerate(lines) if line.startswith(b"kind,"))
            return lines[:row] + [lines[row].replace(b"thrust_n", b"thrust_lbf")] + lines[row + 1:]
        path = _damaged(tmp_path, clock, edit)
        header_lines = sum(1 for line in path.read_bytes().split(b"\n") if line.startswith(b"#"))
        with pytest.raises(LogFormatError, match=f"line {header_lines + 1}: .*column row"):
            RunLog.open(path)

    def test_damaged_row_names_its_line(self, tmp_path, clock):
        # Reading every column checks each row's field count (pandas' C parser; reading only some columns
        # does not, so samples() relies on the kind check below).
        path = _damaged(tmp_path, clock, lambda ls: ls[:-1] + [b"s,2.0,,,1,2,,,ok,\"x\",extra,fields", b""])
        log = RunLog.open(path)
        with pytest.raises(LogFormatError, match=f"line {log.header_lines + 3}:"):
            log.table()

    def test_bad_kind_names_its_line(self, tmp_path, clock):
        path = _damaged(tmp_path, clock, lambda ls: ls[:-1] + [b"zz,2.0,,,1,2,,,ok,\"x\"", b""])
        log = RunLog.open(path)
        with pytest.raises(LogFormatError, match=f"line {log.header_lines + 3}: row kind 'zz'"):
            log.samples()

    def test_unknown_note_letters_are_skipped(self, tmp_path, clock):
        # docs/run-log.md: a reader skips rows of a note letter it does not know (room to grow within v1)
        path = _damaged(tmp_path, clock, lambda ls: ls[:-1] + [b"q,2.0,,,,,,,later,\"a future note\"", b""])
        log = RunLog.open(path)
        assert len(log.samples()) == 1 and len(log.raw_lines()) == 1 and log.events() == []

    def test_writer_contract(self, tmp_path, clock):
        w = new_writer(tmp_path / "run.ejlog", clock)
        with pytest.raises(MonitorError, match="tank_pressure has 1 samples for 2 good lines"):
            w.on_reading(reading([1.0, 2.0], [b"a", b"b"], [0, 0], {"tank_pressure": [1.0], "thrust": [1.0]}))
        with pytest.raises(MonitorError, match="note kind 's'"):
            w.write_note("s", 1.0, "x", "y")
        with pytest.raises(MonitorError, match="label"):
            w.write_event(1.0, "link lost", "a space in the label would need quoting")
        w.close()
        with pytest.raises(ConfigError, match="channel name"):
            RunLogWriter(tmp_path / "b.ejlog", "", [ChannelColumn("raw", "dimensionless")], clock)
        with pytest.raises(ConfigError, match="channel name"):
            ChannelColumn("Tank Pressure", "pressure")


class TestPlainPandas:
    def test_body_reads_with_skiprows(self, tmp_path, clock):
        path = tmp_path / "run.ejlog"
        with new_writer(path, clock) as w:
            w.on_reading(reading([0.1, 0.2, 0.3], [b"a,1", b"junk", b"c,3"], [0, 1, 0],
                                 {"tank_pressure": [2.5e7, 2.4999e7], "thrust": [1.25, np.nan]},
                                 {"tank_pressure": [0, 0], "thrust": [0, 4]}, seq=[7, -1, 9]))
        text = path.read_text()
        header_lines = int(text.splitlines()[1].split(": ")[1])
        assert header_lines == sum(1 for line in text.splitlines() if line.startswith("#"))
        df = pd.read_csv(path, skiprows=header_lines)  # plain pandas, default options
        assert list(df.columns) == ["kind", "t_s", "device_t_s", "seq", "tank_pressure_pa", "thrust_n",
                                    "tank_pressure_q", "thrust_q", "status", "raw"]
        assert df["kind"].tolist() == ["s", "b", "s"]
        assert df["tank_pressure_pa"].tolist()[0] == 2.5e7 and np.isnan(df["thrust_n"][2])
        assert df["thrust_q"].tolist()[2] == 4 and df["status"].tolist() == ["ok", "garbage", "ok"]
        assert df["raw"].tolist() == ["a,1", "junk", "c,3"]


def test_the_documented_example_reads_back(tmp_path):
    # docs/run-log.md's example file, and its recipe for plain pandas
    doc = (Path(__file__).resolve().parents[2] / "docs" / "run-log.md").read_text(encoding="utf-8")
    example = doc.split("```text\n", 1)[1].split("```", 1)[0]
    path = tmp_path / "example.ejlog"
    path.write_text(example, encoding="ascii")
    log = RunLog.open(path)
    assert log.header.started_utc == START and log.header.rig_text.startswith("[rig]\nname = \"Bench stand\"")
    assert [line for _, line, _ in log.raw_lines()] == [b"10,1,19.2,0.000", b"11,2,19.2,0.0\x00*4F",
                                                        b"30,3,25.9,1.250"]
    assert log.samples()["tank_pressure_q"].tolist() == [0, 4]
    assert [(e.kind, e.detail) for e in log.events()] == [("connected", "/dev/ttyACM0 at 115200 baud")]
    body = pd.read_csv(path, skiprows=log.header_lines, keep_default_na=False, na_values=[""])
    assert body["kind"].tolist() == ["e", "s", "b", "s", "a"] and body["thrust_n"][3] == 1.25


def test_lines_holding_a_line_feed_keep_it_escaped(tmp_path):
    """A CR-framed stream can carry '\\n' inside a line: the bulk escape must not split it."""
    from monitor.recorder.writer import _escaped_lines

    lines = [b"a,1", b"b\n2", b"c,3"]
    assert _escaped_lines(lines) == [escape_bytes(x) for x in lines] == ["a,1", "b\\n2", "c,3"]
    assert _escaped_lines([b"x", b"y"]) == ["x", "y"]
    assert _escaped_lines([]) == []
