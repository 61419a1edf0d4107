"""Make the demo run logs in replay_logs/ from the bundled rigs' simulated scenarios, deterministically.

`python -m monitor.demo_logs [OUT_DIR]` writes them (default replay_logs/). The simulator runs on a FakeClock as
fast as the machine allows, through the same live source, calibration and recorder as a real run, at a reduced
sample rate so that each log stays small enough for the repository.
"""

from __future__ import annotations

import re
import sys
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

from drivers.sim_scenario import parse_simulation
from drivers.simulated import RigSimulator, SimulatedDriver
from monitor.calibration import Calibrator, parse_channels
from monitor.clock import FakeClock
from monitor.config import parse_rig
from monitor.pipeline import Pipeline
from monitor.recorder.writer import RunLogWriter
from monitor.rigs import resolve_rig
from monitor.sources.live import LiveSource

# An invented, fixed start time, so that making the logs twice gives the same bytes.
DEMO_START_UTC = datetime(2026, 1, 15, 9, 30, 0, tzinfo=timezone.utc)


@dataclass(frozen=True)
class DemoLog:
    """One demo log: which rig, which scenario, at what sample rate."""

    file_name: str
    rig: str
    scenario: str | None
    sample_rate: str


DEMO_LOGS = (
    DemoLog("bench_pulses.ejlog", "bench_nitrogen_1l", None, "200 Hz"),
    DemoLog("bench_leak_and_dropout.ejlog", "bench_nitrogen_1l", "leak_and_dropout", "200 Hz"),
    DemoLog("hover_hops.ejlog", "hover_air_3l", None, "200 Hz"),
)


def with_sample_rate(rig_text: str, sample_rate: str) -> str:
    """The rig text with [simulation] sample_rate set to sample_rate (the line must be there)."""
    text, count = re.subn(r'(?m)^sample_rate = "[^"]*"', f'sample_rate = "{sample_rate}"', rig_text)
    if count != 1:
        raise ValueError("the rig's [simulation] table needs exactly one sample_rate line")
    return text


def make_demo_log(demo: DemoLog, out_dir: Path) -> Path:
    """Simulate one demo run and record it to out_dir/demo.file_name (which must not exist yet)."""
    path = resolve_rig(demo.rig)
    rig = parse_rig(with_sample_rate(path.read_text(encoding="utf-8"), demo.sample_rate), f"{demo.rig}.toml")
    clock = FakeClock()
    specs = parse_channels(rig)
    simulator = RigSimulator(rig, demo.scenario)
    duration_s = parse_simulation(rig, {s.name: s.role for s in specs}, demo.scenario).duration_s
    driver = SimulatedDriver(simulator, clock, duration_s=duration_s)
    source = LiveSource(driver, Calibrator(parse_channels(rig, driver.fields), driver.fields), rig.text)
    out = out_dir / demo.file_name
    writer = RunLogWriter(out, rig.text, source.channels, clock, rig_source=f"{demo.rig}.toml", started_utc=DEMO_START_UTC)
    pipeline = Pipeline(source, [writer], clock)
    source.open()
    try:
        while clock.now() <= duration_s + 0.5:
            pipeline.step(0.25)
    finally:
        pipeline.stop()
        source.close()
    return out


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    out_dir = Path(args[0]) if args else Path("replay_logs")
    out_dir.mkdir(parents=True, exist_ok=True)
    for demo in DEMO_LOGS:
        print(make_demo_log(demo, out_dir))  # noqa: T201 - a maintainer's script
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
