"""The whole acquisition chain with no hardware: `ejecta simulate` on a real pseudo-terminal, `ejecta record` reading
it through the serial driver, the run log, and a replay that gives back the recorded samples bit for bit."""

import math
import select
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from drivers.simulated import generate_lines
from monitor.clock import FakeClock
from monitor.commands.simulate import STALL_S
from monitor.config import load_rig
from monitor.demo_logs import DEMO_LOGS, make_demo_log
from monitor.recorder.reader import RunLog
from monitor.rigs import resolve_rig
from monitor.samples import Batch
from monitor.sources.replay import ReplaySource

pytest.importorskip("termios")
ROOT = Path(__file__).resolve().parents[1]
START_LIMIT_S = 120.0  # a bound on start-up (CoolProp import, tables), not a measurement


def test_simulate_record_replay_over_a_real_pty(tmp_path):
    sim = subprocess.Popen(
        [sys.executable, "-m", "monitor", "simulate", "bench_nitrogen_1l", "--duration", "inf"],
        cwd=ROOT,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    try:
        ready, _, _ = select.select([sim.stdout], [], [], START_LIMIT_S)
        assert ready, "ejecta simulate printed no device path"
        device = sim.stdout.readline().decode().strip()
        log = tmp_path / "run.ejlog"
        record = subprocess.run(
            [
                sys.executable,
                "-m",
                "monitor",
                "record",
                "bench_nitrogen_1l",
                "--port",
                device,
                "--duration",
                "3",
                "--out",
                str(log),
                "--quiet",
            ],
            cwd=ROOT,
            capture_output=True,
            text=True,
            timeout=START_LIMIT_S + 60,
        )
    finally:
        sim.send_signal(signal.SIGINT)
        sim.wait(timeout=30)
    assert record.returncode == 0, record.stderr
    assert f"log: {log}" in record.stdout

    run = RunLog.open(log)
    raw = list(run.raw_lines())
    good = [data for _, data, status in raw if status == 0]
    received_s = [t for t, _, status in raw if status == 0]
    assert len(good) > 1000  # 3 s at 1 kHz, less what start-up and the first partial line cost
    # Every good line is exactly one the simulator makes for this rig and seed, in order, none lost. The one
    # allowed exception is the simulator's own: when nobody drains the terminal for STALL_S (a host that
    # stalls the recording process) it drops its backlog. Then the receive times show that stall.
    rig = load_rig(resolve_rig("bench_nitrogen_1l"))
    expected = [line for _, lines in generate_lines(rig, 600.0) for line in lines]
    position = {line: k for k, line in enumerate(expected)}
    index = [position[line] for line in good]
    for k in np.flatnonzero(np.diff(index) != 1):
        assert index[k + 1] > index[k], f"line {k + 1} is out of order"
        stalled_s = received_s[k + 1] - received_s[k]
        assert stalled_s >= 0.9 * STALL_S, f"{index[k + 1] - index[k] - 1} lines lost after line {k} without a stall"

    samples = run.samples()
    replayed = Batch.concat([r.batch for r in ReplaySource(log, FakeClock(), speed=math.inf)])
    assert replayed.t_s.tobytes() == samples["t_s"].to_numpy().tobytes()
    for channel in run.header.channels:
        assert replayed.values[channel.name].tobytes() == samples[channel.column].to_numpy().tobytes()
    pressure = samples["tank_pressure_pa"].to_numpy()
    # Calibrated back to SI: at or a little below the rig's fill pressure, 200 bar gauge (the simulator may have
    # fired a pulse or two before the recorder connected).
    assert 190e5 < np.nanmedian(pressure) < 201.5e5


@pytest.mark.parametrize("demo", DEMO_LOGS[-1:], ids=lambda d: d.file_name)
def test_demo_logs_are_what_the_code_makes(tmp_path, demo):
    """The shipped demo logs are deterministic products of the simulator: making one again gives the same bytes."""
    made = make_demo_log(demo, tmp_path)
    assert made.read_bytes() == (ROOT / "replay_logs" / demo.file_name).read_bytes()


def test_every_demo_log_replays(tmp_path):
    for demo in DEMO_LOGS:
        source = ReplaySource(ROOT / "replay_logs" / demo.file_name, FakeClock(), speed=math.inf)
        readings = list(source)
        assert sum(len(r.batch) for r in readings) > 4000
        assert any(e.kind == "connected" for r in readings for e in r.raw.events)
