"""Measure `ejecta review` on a one-hour 1 kHz run log against pandas.read_csv of the same file; prints the ratio.

Run: python tests/review/measure_review.py [HOURS] [--log PATH]
Without --log, writes a log of HOURS (default 1) to a temporary folder, deleted afterwards; with --log, uses
(or first creates) PATH. The log comes from the benchmark chain (monitor.bench.Chain: framing, parsing,
calibration, engine, recorder). Each measurement runs in a fresh Python process, so peak memory is its own:
  pandas   pandas.read_csv(path, skiprows=header lines), timed after `import pandas`;
  review   monitor.review.review_log(path), timed after importing ejecta (CoolProp's import, about 2 s, is
           start-up, not work on the file): first with the rig's property tables built inside the timing, then
           again with them taken from the gas-state memo (monitor.gas_memo), as every later review of the rig;
  command  the whole `ejecta review PATH` command, start-up included, wall clock: first with an empty gas-state
           memo (monitor.gas_memo: CoolProp is loaded and the tables built), then again (neither).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from monitor.bench import Chain, bench_rig, synthetic_lines  # noqa: E402
from monitor.clock import FakeClock, RunClock  # noqa: E402
from monitor.gas_memo import MEMO_ENV  # noqa: E402

CHILD = """
import json, resource, sys, time
sys.path.insert(0, {root!r})
{imports}
start = time.perf_counter()
{work}
seconds = time.perf_counter() - start
print(json.dumps({{"seconds": seconds, "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e3}}))
"""


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


def _child(imports: str, work: str) -> dict:
    code = CHILD.format(root=str(ROOT), imports=imports, work=work)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def measure(path: Path) -> dict:
    """Seconds and peak RSS of pandas.read_csv, review_log and the whole command on one log."""
    from monitor.recorder import RunLog

    skip = RunLog.open(path).header_lines
    pandas = _child("import pandas as pd", f"rows = len(pd.read_csv({str(path)!r}, skiprows={skip}))")
    imports = "import CoolProp.CoolProp\nfrom monitor.gas_memo import install_from_environment\n" \
              "from monitor.review import review_log\ninstall_from_environment()"
    command_s = []
    with tempfile.TemporaryDirectory() as memo:
        os.environ[MEMO_ENV] = memo  # the children's gas-state memo: empty at first
        review = _child(imports, f"review_log({str(path)!r})")  # builds the rig's tables, fills the memo
        review_memo = _child(imports, f"review_log({str(path)!r})")  # takes them from the memo
        for _ in range(2):  # the whole command with an empty memo, then with the filled one
            if not command_s:
                for entry in Path(memo).iterdir():
                    entry.unlink()
            start = time.perf_counter()
            subprocess.run([sys.executable, "-m", "monitor", "review", str(path)], cwd=ROOT, check=True,
                           stdout=subprocess.DEVNULL)
            command_s.append(time.perf_counter() - start)
        del os.environ[MEMO_ENV]
    return {"pandas": pandas, "review": review, "review_memo": review_memo, "command_s": command_s}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("hours", nargs="?", type=float, default=1.0)
    parser.add_argument("--log", type=Path, help="use this log (created first if missing)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as folder:
        path = args.log or Path(folder) / "hour.ejlog"
        if not path.exists():
            start = time.perf_counter()
            make_log(path, args.hours)
            print(f"wrote {path.stat().st_size / 1e6:,.0f} MB of run log in {time.perf_counter() - start:,.1f} s")
        m = measure(path)
    p, r, w = m["pandas"], m["review"], m["review_memo"]
    print(f"pandas.read_csv {p['seconds']:.2f} s (peak RSS {p['peak_mb']:,.0f} MB)")
    print(f"review, the rig's first (tables built) {r['seconds']:.2f} s (peak RSS {r['peak_mb']:,.0f} MB); "
          f"ratio {r['seconds'] / p['seconds']:.2f}")
    print(f"review again (tables from the memo)    {w['seconds']:.2f} s (peak RSS {w['peak_mb']:,.0f} MB); "
          f"ratio {w['seconds'] / p['seconds']:.2f}")
    first, again = m["command_s"]
    print(f"whole `ejecta review` command, start-up included: {first:.2f} s with an empty gas-state memo, "
          f"{again:.2f} s again")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
