"""Helpers of the UI tests: sessions on a FakeClock driven step by step, and what the terminal shows."""

from __future__ import annotations

import io
import re

from rich.console import Console

from monitor.clock import FakeClock, RunClock
from monitor.config import parse_rig
from monitor.demo_logs import with_sample_rate
from monitor.rigs import resolve_rig
from monitor.session import Session
from monitor.sources.live import open_live_source

STEP_S = 0.05  # one pump of the session: the worker's own step


def bench_text(sample_rate: str = "200 Hz") -> str:
    """The bundled bench rig's text at a lower sample rate (fast tests; same physics and faults)."""
    return with_sample_rate(resolve_rig("bench_nitrogen_1l").read_text(encoding="utf-8"), sample_rate)


def meop_rig_text() -> str:
    """The bench rig whose tank transmitter reads 2 mA high: 37.5 bar more on its 0-300 bar, 16 mA span, so the
    200 bar gauge fill reads 237.5 bar gauge, above the 230 bar gauge MEOP from the first sample."""
    text = bench_text()
    anchor = "[simulation.sensors.tank_pressure]\n"
    assert anchor in text
    return text.replace(anchor, anchor + "offset = 2.0\n")


def sim_session(rig_text: str | None = None, scenario: str | None = "leak_and_dropout", writer_path=None,
                mode: str = "demo") -> tuple[Session, FakeClock]:
    """A session on the in-process simulated rig, on a FakeClock (not started: drive it with advance())."""
    rig = parse_rig(rig_text or bench_text(), "bench_nitrogen_1l.toml")
    clock = FakeClock()
    run_clock = RunClock(clock)
    source = open_live_source(rig, run_clock, None, **({"scenario": scenario} if scenario else {}))
    writer = None
    if writer_path is not None:
        from monitor.recorder.writer import RunLogWriter

        source.open()
        writer = RunLogWriter(writer_path, rig.text, source.channels, run_clock, rig_source="bench_nitrogen_1l.toml")
    return Session(rig, source, run_clock, mode, writer=writer, trend_span_s=600.0), clock


def advance(session: Session, clock: FakeClock, seconds: float) -> None:
    """Move the session on by `seconds` of run time, one worker step at a time."""
    for _ in range(int(round(seconds / STEP_S))):
        clock.advance(STEP_S)
        session.pump(0.0)


def screen_text(app, styles: bool = False) -> str:
    """What the terminal shows now (every layer), as text rows; with styles, as ANSI escape sequences.

    The same composition App.export_screenshot() draws, exported as text instead of SVG.
    """
    width, height = app.size
    console = Console(width=width, height=height, file=io.StringIO(), force_terminal=True, color_system="truecolor",
                      record=True, legacy_windows=False, safe_box=False)
    console.print(app.screen._compositor.render_update(full=True, screen_stack=app._background_screens))
    return console.export_text(styles=styles)


def region_text(screen: str, region) -> list[str]:
    """The rows of a widget's region (x, y, width, height) cut out of screen_text()."""
    rows = screen.split("\n")
    return [rows[y][region.x : region.x + region.width] for y in range(region.y, region.y + region.height)]


ANSI = re.compile(rb"\x1b\[[0-9;?<>=]*[a-zA-Z~]|\x1b\][^\x07\x1b]*(?:\x07|\x1b\\)|\x1b[()][A-Z0-9]|\x1b[=>]")


def strip_ansi(data: bytes) -> str:
    return ANSI.sub(b"", data).decode("utf-8", "replace")
