"""Measure Estimator.update throughput on simulated 1 kHz data in batches of 100, 1,000 and 100,000 samples.

Run: python tests/estimators/measure_estimator.py [--rig NAME] [--seconds S]   (not a test: it prints samples
per second and asserts nothing about speed). The samples are the bundled rig's simulated lines, calibrated
exactly as live; each batch size runs on a fresh Estimator over the same samples, several times, best kept.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from drivers.line_parsing import parse_lines  # noqa: E402
from drivers.simulated import RigSimulator, source_format  # noqa: E402
from monitor.calibration import Calibrator, parse_channels  # noqa: E402
from monitor.config import load_rig  # noqa: E402
from monitor.estimators import Estimator  # noqa: E402
from monitor.estimators.estimator import _slice  # noqa: E402
from monitor.rigs import resolve_rig  # noqa: E402
from monitor.samples import Batch  # noqa: E402


def samples(rig_name: str, seconds: float) -> tuple[object, tuple, Batch]:
    """The rig, its channels and `seconds` of its simulated samples as one calibrated batch (repeating the run)."""
    rig = load_rig(resolve_rig(rig_name))
    fmt = source_format(rig)
    specs = parse_channels(rig, fmt.fields)
    calibrator = Calibrator(specs, fmt.fields)
    sim = RigSimulator(rig)
    batches = [calibrator.apply(parse_lines(b.lines, b.t_s, fmt)) for b in sim.blocks(seconds)]
    return rig, specs, Batch.concat(batches)


def rate(rig, specs, whole: Batch, batch_size: int, repeats: int) -> float:
    """Best samples per second of update() over the whole batch cut into batch_size pieces."""
    pieces = [_slice(whole, a, min(a + batch_size, len(whole))) for a in range(0, len(whole), batch_size)]
    best = 0.0
    for _ in range(repeats):
        estimator = Estimator(rig, specs)
        start = time.perf_counter()
        for piece in pieces:
            estimator.update(piece)
        best = max(best, len(whole) / (time.perf_counter() - start))
    return best


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rig", default="bench_nitrogen_1l")
    parser.add_argument("--seconds", type=float, default=300.0, help="seconds of 1 kHz samples (default 300)")
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    rig, specs, whole = samples(args.rig, args.seconds)
    Estimator(rig, specs)  # build and cache the tables once, outside the timing
    print(f"{args.rig}: {len(whole)} samples of {len(specs)} channels at 1 kHz")
    for size in (100, 1_000, 100_000):
        print(f"  batches of {size:>7}: {rate(rig, specs, whole, size, args.repeats):>12,.0f} samples/s")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
