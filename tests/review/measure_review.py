"""Measure `ejecta review` on a one-hour 1 kHz run log against pandas.read_csv of the same file; prints the ratio.

Run: python tests/review/measure_review.py [HOURS]  (writes the log to a temporary folder, deleted afterwards).
The log comes from the benchmark chain (monitor.bench.Chain: framing, parsing, calibration, engine, recorder).
"""

from __future__ import annotations

import resource
import sys
import tempfile
import time
from pathlib import Path

import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from monitor.bench import Chain, bench_rig, synthetic_lines  # noqa: E402
from monitor.clock import FakeClock, RunClock  # noqa: E402
from monitor.recorder import RunLog  # noqa: E402
from monitor.review import review_log  # noqa: E402


def make_log(path: Path, hours: float, rate_hz: float = 1000.0, chunk_s: float = 0.05) -> None:
    """hours of rate_hz lines through the chain, recorded to path (run time from a fake clock).

    Lines arrive in reads of chunk_s and share that read's receive time; chunk_s stays below the engine's
    0.1 s grid (monitor.engine.TICK_S), as a live serial link does, so no read looks like a silence.
    """
    fake = FakeClock()
    chain = Chain(bench_rig(), path, clock=RunClock(fake))
    per_chunk = int(round(rate_hz * chunk_s))
    minute = int(round(60.0 / chunk_s))
    done, total = 0, int(hours * 3600.0 / chunk_s)
    while done < total:
        block = min(minute, total - done)
        data = synthetic_lines(per_chunk * block, rate_hz, first=done * per_chunk)
        lines = data.split(b"\n")[:-1]
        for k in range(block):
            fake.advance(chunk_s)
            chain.feed(b"\n".join(lines[k * per_chunk:(k + 1) * per_chunk]) + b"\n", (done + k + 1) * chunk_s)
        done += block
    chain.close()


def main() -> int:
    hours = float(sys.argv[1]) if len(sys.argv) > 1 else 1.0
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "hour.ejlog"
        start = time.perf_counter()
        make_log(path, hours)
        print(f"wrote {path.stat().st_size / 1e6:,.0f} MB of run log in {time.perf_counter() - start:,.1f} s")
        log = RunLog.open(path)
        start = time.perf_counter()
        frame = pd.read_csv(path, skiprows=log.header_lines)
        pandas_s = time.perf_counter() - start
        rows = len(frame)
        del frame
        start = time.perf_counter()
        review = review_log(path)
        review_s = time.perf_counter() - start
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e3
    print(f"rows {rows:,}; pandas.read_csv {pandas_s:.2f} s; review {review_s:.2f} s; ratio {review_s / pandas_s:.2f}")
    print(f"pulses {review.summary.firing.pulse_count}, burn {review.summary.firing.burn_time_s:.1f} s; "
          f"peak RSS {peak_mb:,.0f} MB")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
