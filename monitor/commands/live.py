"""Watch a test on the rig's real sensors; the run is recorded to a new run log from the first line on."""

from __future__ import annotations

import argparse
from pathlib import Path


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("rig", help="rig file, or a bundled rig's name")
    parser.add_argument("--port", help="serial device or pyserial URL; overrides the rig's source.port")
    parser.add_argument("--out", type=Path, help="run log to create (never overwritten); default runs/<rig>-<UTC time>.ejlog")


def run(args: argparse.Namespace) -> int:
    from monitor.clock import MonotonicClock, RunClock
    from monitor.commands.demo import MIN_STEP_S, TREND_SPAN_S
    from monitor.commands.record import default_log_path
    from monitor.config import load_rig
    from monitor.engine import Engine
    from monitor.recorder.writer import RunLogWriter
    from monitor.rigs import resolve_rig
    from monitor.session import Session
    from monitor.sources.live import open_live_source
    from monitor.ui.app import run_session

    rig = load_rig(resolve_rig(args.rig))
    clock = RunClock(MonotonicClock())
    source = open_live_source(rig, clock, args.port)
    # Build the engine's property tables (CoolProp, about 1 to 3 s; cached for the session's own engine) and
    # check the alert rules before the port opens: once it is open, nothing may keep it unread that long.
    Engine(rig, source.channels)
    path = args.out or default_log_path(rig.source_path)
    path.parent.mkdir(parents=True, exist_ok=True)
    clock.restart()  # run time 0 is when the port opens, not when ejecta started loading
    source.open()  # a port that cannot be opened fails here, before a log file exists
    writer = RunLogWriter(path, rig.text, source.channels, clock, rig_source=rig.source_path or "")
    print(f"recording to {path}", flush=True)
    session = Session(rig, source, clock, "live", writer=writer, trend_span_s=TREND_SPAN_S, min_step_s=MIN_STEP_S)
    try:
        run_session(session)
    finally:
        print(f"log: {path} ({writer.rows:,} rows, closed)")
    return 0
