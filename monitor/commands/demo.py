"""Watch a simulated cold-gas test on the monitor: valve pulses, a slow leak and a sensor dropout, no hardware needed."""

from __future__ import annotations

import argparse
from pathlib import Path

DEMO_SCENARIO = "leak_and_dropout"  # the scenario a demo plays when the rig has one of that name
TREND_SPAN_S = 600.0  # the longest trend window the screen offers, s
MIN_STEP_S = 0.05  # the worker reads at most 20 times a second: batches large enough to keep the engine cheap


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("rig", nargs="?", default=None, help="rig file, or a bundled demo rig's name (default: the bench stand)")
    parser.add_argument("--scenario", help=f"a scenario of the rig's [simulation] table (default: {DEMO_SCENARIO} when "
                        "the rig has one, else the rig's own [simulation])")
    parser.add_argument("--record", action="store_true", help="also record the run to a new run log")
    parser.add_argument("--out", type=Path, help="with --record: the log to create (default runs/<rig>-<UTC time>.ejlog)")


def demo_scenario(rig, requested: str | None) -> str | None:
    """The scenario to play: the one asked for, else DEMO_SCENARIO if the rig has it, else the rig's own."""
    if requested is not None:
        return requested
    scenarios = rig.simulation.get("scenarios", {})
    return DEMO_SCENARIO if isinstance(scenarios, dict) and DEMO_SCENARIO in scenarios else None


def open_demo_source(rig, clock, scenario: str | None):
    """The in-process simulated rig as a live source (not yet opened).

    Raises:
        ConfigError: the rig's [source] driver is not 'simulated', or the scenario is unknown.
    """
    from monitor.errors import ConfigError
    from monitor.sources.live import open_live_source

    driver = rig.source.get("driver")
    if driver != "simulated":
        raise ConfigError("source.driver", driver, "'simulated' for ejecta demo (use ejecta live for real sensors)",
                          rig.source_path)
    options = {"scenario": scenario} if scenario else {}
    return open_live_source(rig, clock, None, **options)


def run(args: argparse.Namespace) -> int:
    from monitor.clock import MonotonicClock, RunClock
    from monitor.commands.record import default_log_path
    from monitor.config import load_rig
    from monitor.recorder.writer import RunLogWriter
    from monitor.rigs import resolve_rig
    from monitor.session import Session
    from monitor.ui.app import run_session

    rig = load_rig(resolve_rig(args.rig))
    clock = RunClock(MonotonicClock())
    source = open_demo_source(rig, clock, demo_scenario(rig, args.scenario))
    writer = None
    if args.record:
        path = args.out or default_log_path(rig.source_path)
        path.parent.mkdir(parents=True, exist_ok=True)
        clock.restart()  # the run starts as the simulated board starts sending (its tables are built by now)
        source.open()
        writer = RunLogWriter(path, rig.text, source.channels, clock, rig_source=rig.source_path or "")
    elif args.out is not None:
        from monitor.errors import ConfigError

        raise ConfigError("--out", str(args.out), "--record as well (a demo records only when asked)")
    session = Session(rig, source, clock, "demo", writer=writer, trend_span_s=TREND_SPAN_S, min_step_s=MIN_STEP_S)
    if writer is None:
        clock.restart()  # run time 0 is when the board starts sending, not when ejecta started loading
    run_session(session)
    if writer is not None:
        print(f"log: {writer.path} ({writer.rows:,} rows, closed)")
    return 0
