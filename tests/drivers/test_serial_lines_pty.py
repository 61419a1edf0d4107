"""Tests for drivers.serial_lines.SerialLinesDriver over real pseudo-terminals (os.openpty): delivery, a device
that goes away, reconnection, garbage; plus one scripted port for a link that drops in the middle of a read.

Every wait is a bounded loop of driver reads (each read waits at most its timeout), never an assertion on speed.
The reader drains before the writer closes: when the device side of a pty closes, unread bytes are lost.
"""

from __future__ import annotations

import os
import threading
import types

import numpy as np
import pytest
import serial

from drivers import load_driver
from drivers.base import LineStatus
from drivers.line_format import LineFormat
from drivers.serial_lines import SerialLinesDriver
from monitor.clock import FakeClock, MonotonicClock
from monitor.errors import ConfigError, SourceError

pytestmark = pytest.mark.skipif(not hasattr(os, "openpty"), reason="needs POSIX pseudo-terminals")

COLUMNS = ("seq", "p1", "p2", "t1", "flow", "load", "aux")
READ_TIMEOUT_S = 0.05


def line_for(seq: int) -> bytes:
    return b"%d,%.3f,%.2f,%.1f,%d,%.4f,%d\n" % (seq, seq * 0.5, -seq / 4, 20 + seq % 7, seq * 3, seq / 8, -seq)


def values_for(seq: np.ndarray) -> np.ndarray:
    """The values line_for() prints, computed from the numbers and not from the text."""
    return np.column_stack([seq * 0.5, -seq / 4, 20 + seq % 7, seq * 3, seq / 8, -seq]).astype(float)


class Writer(threading.Thread):
    """Writes bytes to a pty master without blocking forever: gives up when told to stop."""

    def __init__(self, master: int, data: bytes, piece: int = 3001):
        super().__init__(daemon=True)
        self.master, self.data, self.piece = master, memoryview(data), piece
        self.stop = threading.Event()
        os.set_blocking(master, False)

    def run(self) -> None:
        clock = MonotonicClock()
        while self.data and not self.stop.is_set():
            try:
                written = os.write(self.master, self.data[: self.piece])
            except BlockingIOError:
                clock.sleep(0.001)
                continue
            self.data = self.data[written:]


def fmt_for(port: str, **kw) -> LineFormat:
    return LineFormat(port=port, columns=COLUMNS, sequence_field="seq", **kw)


def read_until(driver: SerialLinesDriver, done, max_reads: int = 400):
    """Read at most max_reads times (each waits at most READ_TIMEOUT_S) until done(rows, events) is true."""
    batches, events = [], []
    for _ in range(max_reads):
        raw = driver.read(READ_TIMEOUT_S)
        batches.append(raw)
        events.extend(raw.events)
        if done(batches, events):
            break
    return batches, events


def ok_sequence(batches) -> np.ndarray:
    return np.concatenate([b.sequence[b.ok] for b in batches] or [np.empty(0, np.int64)])


def kinds(events) -> list[str]:
    return [e.kind for e in events]


@pytest.fixture
def pty():
    master, slave = os.openpty()
    path = os.ttyname(slave)
    fds = {"master": master, "slave": slave}
    yield path, fds
    for fd in fds.values():
        if fd is not None:
            try:
                os.close(fd)
            except OSError:
                pass


def close_fd(fds: dict, name: str) -> None:
    os.close(fds[name])
    fds[name] = None


def test_thousands_of_lines_arrive_intact_and_in_order(pty):
    path, fds = pty
    n = 20000
    driver = SerialLinesDriver(fmt_for(path), MonotonicClock())
    with driver:
        close_fd(fds, "slave")
        # the device was mid-line when the port opened: the first fragment must come out PARTIAL
        writer = Writer(fds["master"], b"12.5,3\n" + b"".join(line_for(i) for i in range(n)))
        writer.start()
        try:
            batches, events = read_until(driver, lambda b, e: ok_sequence(b).size >= n)
        finally:
            writer.stop.set()
            writer.join(5)
    status = np.concatenate([b.status for b in batches])
    assert status[0] == LineStatus.PARTIAL and batches[0].lines[0] == b"12.5,3"
    assert (status[1:] == LineStatus.OK).all()
    seq = ok_sequence(batches)
    np.testing.assert_array_equal(seq, np.arange(n))
    values = np.concatenate([b.values[b.ok] for b in batches])
    np.testing.assert_allclose(values, values_for(seq), rtol=0, atol=5e-5)  # printed with 4 decimals at most
    t_s = np.concatenate([b.t_s for b in batches])
    assert (np.diff(t_s) >= 0).all()
    assert kinds(events) == ["connected"]


def test_device_that_closes_is_reported_lost_with_its_cut_line(pty):
    path, fds = pty
    with SerialLinesDriver(fmt_for(path), MonotonicClock()) as driver:
        close_fd(fds, "slave")
        os.write(fds["master"], b"\n" + line_for(0) + line_for(1) + b"2,0.5,0.")  # the last line is cut short
        batches, _ = read_until(driver, lambda b, e: ok_sequence(b).size >= 2)
        batches += read_until(driver, lambda b, e: True)[0]  # drain what is still in flight
        close_fd(fds, "master")
        # bounded: at most 20 reads of at most READ_TIMEOUT_S each, about one second of real time
        lost_batches, events = read_until(driver, lambda b, e: "lost" in kinds(e), max_reads=20)
        assert "lost" in kinds(events)
        assert not driver.connected
        rows = [(line, int(s)) for b in lost_batches for line, s in zip(b.lines, b.status)]
        assert rows == [(b"2,0.5,0.", LineStatus.PARTIAL)]
        # the pty is gone, so a reopen attempt fails and is reported; read() itself never raises
        _, later = read_until(driver, lambda b, e: "reconnecting" in kinds(e), max_reads=40)
        assert "reconnecting" in kinds(later) and not driver.connected
    np.testing.assert_array_equal(ok_sequence(batches), [0, 1])


def test_reconnects_when_the_device_comes_back_on_the_same_path(tmp_path):
    """Unplug and replug a device behind a fixed path, and check the driver's own reopen code finds it again.

    A pty's slave node (/dev/pts/N) disappears with its master, and a new pty gets whatever number is free, so
    the driver is pointed at a symbolic link that the test re-points to the new pty, just as udev's
    /dev/serial/by-id links follow a USB adapter that is plugged in again. This exercises the real path
    (serial_for_url and open on a device path that is missing for a while, then present) against real
    pseudo-terminals, which loop:// (never fails) and socket:// (a different transport) would not.
    A FakeClock paces the reopen attempts, so their count is exact; reads still wait on the real port.
    """
    link = str(tmp_path / "ttyDEVICE")
    master, slave = os.openpty()
    os.symlink(os.ttyname(slave), link)
    clock = FakeClock(100.0)
    with SerialLinesDriver(fmt_for(link), clock) as driver:
        os.close(slave)
        os.write(master, b"\n" + b"".join(line_for(i) for i in range(50)))
        before, _ = read_until(driver, lambda b, e: ok_sequence(b).size >= 50)
        os.remove(link)  # unplugged: the path is gone
        os.close(master)
        _, events = read_until(driver, lambda b, e: "lost" in kinds(e), max_reads=20)
        assert "lost" in kinds(events)
        lost_at_s = clock.now()
        while_gone, events = read_until(driver, lambda b, e: clock.now() - lost_at_s >= 2.75, max_reads=200)
        # one attempt per 0.5 s: at 0.5, 1.0, 1.5, 2.0 and 2.5 s after the loss
        assert driver.reconnect_attempts == 5
        assert kinds(events) == ["reconnecting"]  # reported once, not at every attempt
        assert sum(len(b) for b in while_gone) == 0

        master2, slave2 = os.openpty()  # plugged in again, under another /dev/pts number
        try:
            os.symlink(os.ttyname(slave2), link)
            _, events = read_until(driver, lambda b, e: "connected" in kinds(e), max_reads=40)
            assert "connected" in kinds(events) and driver.connected
            os.close(slave2)
            slave2 = None
            # the device went on counting while away: 50..79 were lost
            writer = Writer(master2, b"3.5\n" + b"".join(line_for(i) for i in range(80, 2080)))
            writer.start()
            after, events = read_until(driver, lambda b, e: ok_sequence(b).size >= 2000)
            writer.stop.set()
            writer.join(5)
        finally:
            os.close(master2)
            if slave2 is not None:
                os.close(slave2)
    np.testing.assert_array_equal(ok_sequence(before), np.arange(50))
    first = next(b for b in after if len(b))
    assert first.lines[0] == b"3.5" and first.status[0] == LineStatus.PARTIAL
    np.testing.assert_array_equal(ok_sequence(after), np.arange(80, 2080))
    gaps = [e for e in events if e.kind == "gap"]
    assert len(gaps) == 1 and gaps[0].detail.startswith("30 lines missing in 1 gaps")


def test_first_open_of_a_missing_port_raises_naming_it(tmp_path):
    missing = str(tmp_path / "ttyNOPE")
    driver = SerialLinesDriver(fmt_for(missing), MonotonicClock())
    with pytest.raises(SourceError, match="ttyNOPE"):
        driver.open()
    with pytest.raises(SourceError, match="not open"):
        driver.read()


def test_wrong_speed_shows_as_garbage(pty):
    """Bytes received at the wrong baud rate come out as bytes with the high bit set and few line ends."""
    path, fds = pty
    rng = np.random.default_rng(7)
    noise = [bytes(rng.integers(0x80, 0x100, size=int(k), dtype=np.uint8)) for k in rng.integers(3, 40, 60)]
    with SerialLinesDriver(fmt_for(path), MonotonicClock()) as driver:
        close_fd(fds, "slave")
        os.write(fds["master"], b"\n" + b"\n".join(noise[:30]) + b"\n" + line_for(1) + b"\n".join(noise[30:]) + b"\n")
        batches, events = read_until(driver, lambda b, e: sum(len(x) for x in b) >= 61)
    status = np.concatenate([b.status for b in batches])
    assert np.count_nonzero(status == LineStatus.GARBAGE) == 60 and np.count_nonzero(status == LineStatus.OK) == 1
    assert "mostly_garbage" in kinds(events)


class ScriptedPort:
    """Stands in for a pyserial port: hands out chunks, then fails the way a vanished USB adapter does."""

    def __init__(self, chunks: list[bytes]):
        self.chunks = list(chunks)
        self.timeout = None
        self.is_open = False

    def open(self) -> None:
        self.is_open = True

    def close(self) -> None:
        self.is_open = False

    @property
    def in_waiting(self) -> int:
        if not self.chunks:
            raise OSError(5, "Input/output error")
        return len(self.chunks[0])

    def read(self, size: int) -> bytes:
        return self.chunks.pop(0)


def test_lines_read_before_the_link_drops_in_the_same_read_are_kept(monkeypatch):
    ports = [ScriptedPort([b"\n" + line_for(0) + line_for(1)[:5], line_for(1)[5:] + line_for(2)[:4]])]
    opened = []

    def serial_for_url(url, do_not_open=False):
        opened.append(url)
        if not ports:
            raise serial.SerialException(f"could not open port {url}: [Errno 2] No such file or directory")
        return ports.pop(0)

    monkeypatch.setattr(serial, "serial_for_url", serial_for_url)
    clock = FakeClock(0.0)
    driver = SerialLinesDriver(fmt_for("/dev/ttyFAKE"), clock)
    driver.open()
    raw = driver.read(0.1)
    assert kinds(raw.events) == ["connected", "lost"]
    assert list(raw.sequence[raw.ok]) == [0, 1]
    assert raw.lines[-1] == line_for(2)[:4] and raw.status[-1] == LineStatus.PARTIAL
    for _ in range(26):  # 3.25 s of fake time: attempts at 0.5, 1.0, ..., 3.0 s
        driver.read(0.125)
    assert driver.reconnect_attempts == len(opened) - 1 == 6
    driver.close()


def test_registered_and_built_from_a_rig():
    assert load_driver("serial_lines") is SerialLinesDriver
    rig = types.SimpleNamespace(source={"driver": "serial_lines", "port": "loop://", "columns": ["x"]},
                                source_path="bench.toml")
    driver = SerialLinesDriver.from_rig(rig, FakeClock(), port="socket://localhost:1")
    assert driver.url == "socket://localhost:1" and driver.fields == ("x",)
    rig.source = {"columns": ["x"]}
    with pytest.raises(ConfigError, match="source.port"):
        SerialLinesDriver.from_rig(rig, FakeClock())


def test_loop_url_round_trip():
    """pyserial's loop:// echoes what is written: a quick check that URLs, not only paths, are opened."""
    with SerialLinesDriver(LineFormat(port="loop://", columns=("a", "b"), layout="whitespace"), FakeClock()) as d:
        d._port.write(b"\n1 2\n3 4\n")
        batches, _ = read_until(d, lambda b, e: sum(int(x.ok.sum()) for x in b) >= 2, max_reads=40)
    values = np.concatenate([b.values[b.ok] for b in batches])
    np.testing.assert_array_equal(values, [[1, 2], [3, 4]])
