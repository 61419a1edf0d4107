"""`ejecta simulate`: a real pseudo-terminal that pyserial reads, a clean stop on SIGINT, exit 2 on a bad rig."""

import os
import re
import select
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from drivers.base import LineStatus
from drivers.line_framing import LineSplitter
from drivers.line_parsing import parse_lines
from drivers.simulated import source_format
from monitor.cli import main
from monitor.config import load_rig
from monitor.rigs import resolve_rig

pytest.importorskip("termios")
serial = pytest.importorskip("serial")

ROOT = Path(__file__).resolve().parents[1]
START_LIMIT_S = 120.0  # a bound on start-up (CoolProp import, tables), not a measurement


def _start(*args: str) -> tuple[subprocess.Popen, str]:
    proc = subprocess.Popen([sys.executable, "-m", "monitor", "simulate", *args], cwd=ROOT,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    ready, _, _ = select.select([proc.stdout], [], [], START_LIMIT_S)
    if not ready:
        proc.kill()
        pytest.fail("ejecta simulate printed no device path")
    return proc, proc.stdout.readline().decode().strip()


def _read_lines(port, want: int, fmt) -> tuple[list[bytes], np.ndarray]:
    """Read until `want` complete lines (or the device goes away); returns lines and their framing status."""
    splitter = LineSplitter(fmt)
    lines, status = [], []
    for _ in range(20_000):  # each read waits at most the port's timeout
        try:
            data = port.read(port.in_waiting or 1)
        except serial.SerialException:
            break
        framed = splitter.feed(data, 0.0)
        lines += framed.lines
        status += framed.status.tolist()
        if len(lines) >= want:
            break
    return lines, np.array(status, dtype=np.uint8)


def test_simulate_writes_parsable_lines_to_a_pty_and_stops_on_sigint():
    fmt = source_format(load_rig(resolve_rig("bench_nitrogen_1l")))
    proc, path = _start("bench_nitrogen_1l", "--speed", "4", "--duration", "inf")
    try:
        assert path.startswith("/dev/")
        with serial.Serial(path, timeout=0.5) as port:
            lines, status = _read_lines(port, 400, fmt)
        assert len(lines) >= 400
        raw = parse_lines(lines, np.zeros(len(lines)), fmt, status)
        # Every line after a possibly cut first one reads: whole numbers of ms, consecutive sequence numbers.
        assert (raw.status[1:] == LineStatus.OK).all()
        assert np.isfinite(raw.values[1:]).all()
        assert (np.diff(raw.sequence[1:]) % 65536 == 1).all()
        assert np.allclose(np.diff(raw.device_time_s[1:]), 0.001)
        proc.send_signal(signal.SIGINT)
        assert proc.wait(timeout=30) == 0
        err = proc.stderr.read().decode()
        assert "sent" in err and "Traceback" not in err
    finally:
        if proc.poll() is None:
            proc.kill()
        proc.wait()


def test_simulate_ends_by_itself_after_its_duration_with_every_line_delivered():
    fmt = source_format(load_rig(resolve_rig("bench_nitrogen_1l")))
    proc, path = _start("bench_nitrogen_1l", "--duration", "1.5", "--speed", "1")
    try:
        with serial.Serial(path, timeout=0.5) as port:
            lines, status = _read_lines(port, 10**9, fmt)  # until the simulator closes the terminal
        assert proc.wait(timeout=30) == 0
        raw = parse_lines(lines, np.zeros(len(lines)), fmt, status)
        ok = raw.status == LineStatus.OK
        assert ok[1:].all() and raw.device_time_s[-1] == pytest.approx(1.499)  # the last line was drained
    finally:
        if proc.poll() is None:
            proc.kill()
        proc.wait()


def test_nobody_reading_drops_lines_without_blocking():
    proc, path = _start("hover_air_3l", "--duration", "3", "--speed", "3")
    try:
        assert proc.wait(timeout=60) == 0  # 1 s of play plus the drain limit: it did not wait for a reader
        err = proc.stderr.read().decode()
        sent, dropped = (int(x) for x in re.search(r"sent (\d+) lines, dropped (\d+)", err).groups())
        assert dropped > 0 and sent + dropped >= 3000 - 400  # all but what sat in the terminal when it closed
        assert "Traceback" not in err
    finally:
        if proc.poll() is None:
            proc.kill()
        proc.wait()


def _bad_rig(tmp_path, old: str, new: str) -> str:
    text = resolve_rig("bench_nitrogen_1l").read_text()
    assert old in text
    path = tmp_path / "rig.toml"
    path.write_text(text.replace(old, new, 1))
    return str(path)


@pytest.mark.parametrize(
    ("old", "new", "key"),
    [
        ('rate = "0.15 g/s"', 'rate = "0.15 g"', "simulation.scenarios.leak_and_dropout.faults[0].rate"),
        ('start = "2 s"\non = "1 s"', 'start = "-2 s"\non = "1 s"', "simulation.pulses[0].start"),
        ('field = "load_N"', 'field = "load"', "channels[4].field"),
        ('device_time_unit = "ms"', 'device_time_unit = "minutes"', "source.device_time_unit"),
    ],
)
def test_bad_rig_exits_2_naming_the_key(tmp_path, capsys, old, new, key):
    assert main(["simulate", _bad_rig(tmp_path, old, new)]) == 2
    err = capsys.readouterr().err
    assert key in err and "Traceback" not in err


def test_bad_options_exit_2(capsys):
    assert main(["simulate", "bench_nitrogen_1l", "--scenario", "meteor"]) == 2
    assert "scenario" in capsys.readouterr().err
    assert main(["simulate", "bench_nitrogen_1l", "--speed", "0"]) == 2
    assert "--speed" in capsys.readouterr().err
    assert main(["simulate", "no_such_rig"]) == 2


def test_sigterm_stops_it_cleanly_too():
    proc, path = _start("bench_nitrogen_1l", "--duration", "inf")
    try:
        assert os.path.exists(path)
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(timeout=30) == 0
    finally:
        if proc.poll() is None:
            proc.kill()
        proc.wait()
