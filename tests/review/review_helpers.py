"""Simulated run logs with their ground truth, for the review tests (same chain as monitor.demo_logs)."""

from __future__ import annotations

import re
from pathlib import Path

from drivers.sim_scenario import parse_simulation
from drivers.simulated import RigSimulator, SimulatedDriver
from monitor.calibration import Calibrator, parse_channels
from monitor.clock import FakeClock
from monitor.config import parse_rig
from monitor.demo_logs import with_sample_rate
from monitor.pipeline import Pipeline
from monitor.recorder.writer import RunLogWriter
from monitor.rigs import resolve_rig
from monitor.sources.live import LiveSource


def rig_text(name: str, sample_rate: str = "200 Hz", no_firing: bool = False, duration: str | None = None) -> str:
    text = with_sample_rate(resolve_rig(name).read_text(encoding="utf-8"), sample_rate)
    if no_firing:
        text = re.sub(r'(?m)^valve_open = .*$', "valve_open = []", text)
        text = re.sub(r"(?ms)^\[\[simulation\.pulses\]\].*?^count = \d+\n", "", text)
    if duration is not None:
        text = re.sub(r'(?m)^duration = "[^"]*"', f'duration = "{duration}"', text, count=1)
    return text


def simulate_log(text: str, out: Path, scenario: str | None = None):
    """Record a simulated run of the rig text to out; returns the simulator's truth (drivers.sim_model)."""
    rig = parse_rig(text, "test rig")
    clock = FakeClock()
    specs = parse_channels(rig)
    simulator = RigSimulator(rig, scenario)
    duration_s = parse_simulation(rig, {s.name: s.role for s in specs}, scenario).duration_s
    driver = SimulatedDriver(simulator, clock, duration_s=duration_s)
    source = LiveSource(driver, Calibrator(parse_channels(rig, driver.fields), driver.fields), rig.text)
    writer = RunLogWriter(out, rig.text, source.channels, clock)
    pipeline = Pipeline(source, [writer], clock)
    source.open()
    try:
        while clock.now() <= duration_s + 0.5:
            pipeline.step(0.25)
    finally:
        pipeline.stop()
        source.close()
    return simulator.truth
