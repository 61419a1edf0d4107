"""A writer killed with SIGKILL mid-run leaves a log that reads back every row it had handed to the OS."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from monitor.recorder import RunLog

REPO = Path(__file__).resolve().parents[2]

# The child writes batches of 50 lines as fast as it can; after each on_reading() returns it prints how
# many rows it has handed over. Row i carries thrust = i * 0.001 N and the raw line b"<i>,x".
CHILD = r"""
import sys
import numpy as np
from drivers.base import RawBatch
from monitor.clock import MonotonicClock
from monitor.recorder import ChannelColumn, RunLogWriter
from monitor.samples import Batch, SourceReading

writer = RunLogWriter(sys.argv[1], "format = 1\n", [ChannelColumn("thrust", "force")], MonotonicClock())
done = 0
while True:
    i = np.arange(done, done + 50)
    raw = RawBatch(t_s=i * 1e-3, lines=[b"%d,x" % k for k in i], status=np.zeros(50, np.uint8),
                   fields=("thrust",), values=(i * 1e-3)[:, None], sequence=i)
    batch = Batch(t_s=i * 1e-3, values={"thrust": i * 1e-3}, quality={"thrust": np.zeros(50, np.uint8)},
                  sequence=i)
    writer.on_reading(SourceReading(raw, batch))
    done += 50
    print(done, flush=True)
"""


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs POSIX SIGKILL")
def test_kill_9_keeps_every_flushed_row(tmp_path):
    path = tmp_path / "killed.ejlog"
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    child = subprocess.Popen([sys.executable, "-c", CHILD, str(path)], stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, env=env, cwd=REPO)
    confirmed = 0
    try:
        while confirmed < 20_000:
            line = child.stdout.readline()
            if not line:
                pytest.fail("the child stopped: " + child.stderr.read().decode(errors="replace"))
            confirmed = int(line)
        child.send_signal(signal.SIGKILL)  # while it is still writing
    finally:
        child.kill()
        child.wait(timeout=30)
        child.stdout.close()
        child.stderr.close()
    assert child.returncode == -signal.SIGKILL

    log = RunLog.open(path)
    s = log.samples()
    n = len(s)
    assert n >= confirmed  # nothing handed over before the kill is lost
    i = np.arange(n)
    assert np.array_equal(s["seq"].to_numpy(), i)
    assert np.array_equal(s["thrust_n"].to_numpy(), i * 1e-3)  # bit for bit: same float expression
    assert [line for _, line, _ in log.raw_lines()] == [b"%d,x" % k for k in i]
    assert log.truncated_lines in (0, 1)
