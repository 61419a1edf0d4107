"""Acquire from the rig's sensors without a screen: record every byte to a new run log and print link health."""

from __future__ import annotations

import argparse
import math
import re
import sys
from datetime import datetime, timezone
from pathlib import Path


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("rig", nargs="?", default=None, help="rig file, or a bundled demo rig's name")
    parser.add_argument("--port", help="serial device or pyserial URL; overrides the rig's source.port")
    parser.add_argument("--out", type=Path, help="run log to create (never overwritten); default runs/<rig>-<UTC time>.ejlog")
    parser.add_argument("--duration", type=float, help="stop after this many seconds (default: until Ctrl-C)")
    parser.add_argument("--scenario", help="simulated rigs only: a scenario of the rig's [simulation] table")
    parser.add_argument("--quiet", action="store_true", help="print only where the log is and the final summary")


def default_log_path(rig_source: str | None, now: datetime | None = None) -> Path:
    """runs/<rig file stem>-<UTC time>.ejlog"""
    stem = re.sub(r"[^A-Za-z0-9_.-]+", "_", Path(rig_source or "rig").stem)
    stamp = (now or datetime.now(timezone.utc)).strftime("%Y%m%dT%H%M%SZ")
    return Path("runs") / f"{stem}-{stamp}.ejlog"


def run(args: argparse.Namespace) -> int:
    from monitor.clock import MonotonicClock, RunClock
    from monitor.config import load_rig
    from monitor.health import LinkHealth
    from monitor.pipeline import Pipeline
    from monitor.recorder.writer import RunLogWriter
    from monitor.rigs import resolve_rig
    from monitor.sources.live import open_live_source

    rig = load_rig(resolve_rig(args.rig))
    clock = RunClock(MonotonicClock())
    options = {"scenario": args.scenario} if args.scenario else {}
    source = open_live_source(rig, clock, args.port, **options)
    path = args.out or default_log_path(rig.source_path)
    path.parent.mkdir(parents=True, exist_ok=True)
    source.open()
    writer = RunLogWriter(path, rig.text, source.channels, clock, rig_source=rig.source_path or "")
    health = LinkHealth(source.channels)
    pipeline = Pipeline(source, [writer, health], clock)
    print(f"recording to {path}", flush=True)
    started_s = clock.now()
    next_status = started_s + 1.0
    try:
        while args.duration is None or clock.now() - started_s < args.duration:
            pipeline.step(0.05)
            if not args.quiet and clock.now() >= next_status:
                print(status_line(health.snapshot(clock.now())), flush=True)
                next_status += 1.0
    except KeyboardInterrupt:
        print("stopping", file=sys.stderr)
    finally:
        pipeline.stop()
        source.close()
    final = health.snapshot(clock.now())
    print(
        f"{final.lines} lines, {final.bad_line_total} bad, {final.sequence_gaps} missed by sequence, "
        f"{final.link_losses} link losses; log: {path}"
    )
    for failure in pipeline.failures[:5]:
        print(f"warning: {failure.listener} failed at {failure.t_s:.3f} s: {failure.message}", file=sys.stderr)
    return 0


def status_line(h) -> str:
    """One line of link health: time, link state, lines, bad lines, per-channel rate and stale flags."""
    parts = [f"{h.t_s:7.1f} s", "link up" if h.link_up else "LINK DOWN", f"{h.lines} lines", f"{h.bad_line_total} bad"]
    for c in h.channels:
        age = "never" if math.isinf(c.age_s) else f"{c.age_s:.2f} s"
        parts.append(f"{c.name} {c.rate_hz:.0f} Hz" + (f" STALE ({age})" if c.stale else ""))
    return " | ".join(parts)
