"""`ejecta demo` and `ejecta live` in a real pseudo-terminal: the screen shows the caution line and thrust; q quits.

The terminal is 80 x 24 with TERM=xterm-256color. Every wait is bounded: START_LIMIT_S for the first screen
(Python start-up, CoolProp, the first snapshot) and EXIT_LIMIT_S for the process to end after the keys.
"""

from __future__ import annotations

import os
import re
import select
import struct
import subprocess
import sys
import time
from pathlib import Path

import pytest
from ui_helpers import strip_ansi

termios = pytest.importorskip("termios")
fcntl = pytest.importorskip("fcntl")

ROOT = Path(__file__).resolve().parents[2]
START_LIMIT_S = 90.0  # a bound on start-up, not a measurement
EXIT_LIMIT_S = 20.0
THRUST = re.compile(r"thrust est\s+\S*\s+-?\d+\.\d{3} N")


class Terminal:
    """A child process on the slave side of a new pseudo-terminal; read() gathers what it draws."""

    def __init__(self, *args: str, columns: int = 80, rows: int = 24):
        self.master, slave = os.openpty()
        fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", rows, columns, 0, 0))
        env = dict(os.environ, TERM="xterm-256color", PYTHONPATH=str(ROOT), COLUMNS=str(columns), LINES=str(rows))
        env.pop("NO_COLOR", None)
        self.proc = subprocess.Popen([sys.executable, "-m", "monitor", *args], stdin=slave, stdout=slave, stderr=slave,
                                     env=env, cwd=ROOT, start_new_session=True)
        os.close(slave)
        self.data = b""

    def read_until(self, found, limit_s: float) -> str:
        """Read until found(text) is true for the text so far (ANSI stripped), or limit_s passes."""
        end = time.monotonic() + limit_s
        while time.monotonic() < end:
            ready, _, _ = select.select([self.master], [], [], 0.2)
            if ready:
                try:
                    chunk = os.read(self.master, 65536)
                except OSError:  # the child closed the terminal
                    break
                if not chunk:
                    break
                self.data += chunk
                if found(strip_ansi(self.data)):
                    break
        return strip_ansi(self.data)

    def press(self, keys: bytes) -> None:
        os.write(self.master, keys)

    def wait(self, limit_s: float) -> int:
        self.read_until(lambda text: False, 0.5)
        try:
            return self.proc.wait(limit_s)
        finally:
            self.close()

    def close(self) -> None:
        if self.proc.poll() is None:
            self.proc.kill()
            self.proc.wait(5)
        try:
            os.close(self.master)
        except OSError:
            pass


def _squeezed(text: str) -> str:
    return re.sub(r"\s+", "", text)


def test_ejecta_demo_draws_the_caution_line_and_thrust_and_quits_on_q():
    term = Terminal("demo")
    try:
        text = term.read_until(lambda t: "CAUTION MEOP" in t and THRUST.search(t) and "THRUST (estimated)" in t,
                               START_LIMIT_S)
        assert "CAUTION MEOP 230.0 bar g" in text, text[-2000:]
        assert "not an interlock" in text
        assert THRUST.search(text), text[-2000:]
        assert "DEMO (simulated rig)" in text and "not recording" in text
        assert " q quit " in text  # the key bar
        term.press(b"q")
        assert term.wait(EXIT_LIMIT_S) == 0
    finally:
        term.close()


def test_ejecta_live_records_asks_before_quitting_and_closes_the_log(tmp_path):
    from monitor.recorder import RunLog

    out = tmp_path / "live.ejlog"
    # the bundled bench rig's [source] is the in-process simulated board: live acquisition without hardware
    term = Terminal("live", "bench_nitrogen_1l", "--out", str(out))
    try:
        text = term.read_until(lambda t: "● REC" in t and THRUST.search(t), START_LIMIT_S)
        assert "LIVE" in text and "● REC" in text, text[-2000:]
        term.press(b"q")
        # The dialog is drawn over the running screen, and textual skips cells that already hold the right
        # character (often the spaces between words), so the words are compared without white space.
        text = term.read_until(lambda t: "STOPTHISRUN?" in _squeezed(t), 10.0)
        assert "STOPTHISRUN?" in _squeezed(text) and "ystopandquit" in _squeezed(text), text[-2000:]
        term.press(b"y")
        assert term.wait(EXIT_LIMIT_S) == 0
        text = strip_ansi(term.data)
        assert f"log: {out}" in text  # printed after the screen is gone
    finally:
        term.close()
    log = RunLog.open(out)
    assert not log.warnings  # closed after a complete row
    assert len(log.table(columns=["kind"])) > 100
