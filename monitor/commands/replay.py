"""Watch a recorded run on the monitor, as it happened or faster, with pause, step, speed and seek."""

from __future__ import annotations

import argparse
import math
from pathlib import Path


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("log", type=Path, help="a run log (from ejecta live, record, demo --record or import)")
    parser.add_argument("--speed", type=float, default=1.0, help="1 = as recorded, 10 = ten times faster (default 1)")


def replay_channels(rig, columns, path) -> tuple:
    """The rig file's channel specs for the log's channels (monitor.sources.replay.rig_channel_specs)."""
    from monitor.sources.replay import rig_channel_specs

    return rig_channel_specs(rig, columns, path)


def open_replay(path, clock, speed: float = 1.0):
    """The rig and the replay source of a run log (channels given their rig-file specs).

    Raises:
        ConfigError: speed is not a positive number, or the rig file in the header is not valid.
        LogFormatError: the log is missing, unreadable or damaged.
    """
    from monitor.config import parse_rig
    from monitor.errors import ConfigError
    from monitor.sources.replay import ReplaySource

    if not (speed > 0.0) or math.isnan(speed):
        raise ConfigError("--speed", speed, "a speed above 0 (1 = as recorded)")
    source = ReplaySource(path, clock, speed)
    rig = parse_rig(source.rig_text, f"{path} (the rig file in its header)")
    source.channels = replay_channels(rig, source.channels, path)
    return rig, source


def run(args: argparse.Namespace) -> int:
    from monitor.clock import MonotonicClock
    from monitor.commands.demo import MIN_STEP_S, TREND_SPAN_S
    from monitor.session import Session
    from monitor.ui.app import run_session

    clock = MonotonicClock()
    rig, source = open_replay(args.log, clock, args.speed)
    session = Session(rig, source, clock, "replay", trend_span_s=TREND_SPAN_S, min_step_s=MIN_STEP_S)
    run_session(session)
    return 0
