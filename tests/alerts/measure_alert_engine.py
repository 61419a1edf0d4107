"""Measure the alert engine: samples per second of update() for 10 rules, whole log at once and in small batches.

Run: python tests/alerts/measure_alert_engine.py [--samples N] [--batch B]   (not a test: it prints figures and
asserts nothing about speed; it does check that the batched run gives the same transitions as the whole one).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from monitor.alerts import AlertEngine, AlertRule  # noqa: E402
from monitor.samples import Quality  # noqa: E402
from monitor.signals import Signals  # noqa: E402


def ten_rules() -> list[AlertRule]:
    """Ten rules of every condition, with deadbands, delays, a latch and a valve gate."""
    return [
        AlertRule("tank_high", "above", "tank_pressure", 2.3e7, severity="critical", deadband=2e5, latch=True),
        AlertRule("tank_low", "below", "tank_pressure", 1.1e6, deadband=1e5, on_delay_s=0.2),
        AlertRule("tank_falling_fast", "rate_below", "tank_pressure", -3e6, deadband=5e5, rate_window_s=0.5),
        AlertRule("feed_low_while_open", "below", "feed_pressure", 6.5e5, deadband=2e4, on_delay_s=0.1,
                  off_delay_s=0.1, only_while="valve"),
        AlertRule("gauges_disagree", "disagree", "propellant_flow_gauge_kg", 0.05, relative=True, deadband=0.01,
                  other="propellant_pvt_gauge_kg"),
        AlertRule("tank_pressure_stale", "stale", "tank_pressure", 0.5),
        AlertRule("feed_pressure_stale", "stale", "feed_pressure", 0.5),
        AlertRule("mass_flow_stale", "stale", "mass_flow", 0.5),
        AlertRule("tank_pressure_out_of_range", "out_of_range", "tank_pressure", 0.5),
        AlertRule("leak", "above", "leak_suspected", 0.5, on_delay_s=1.0),
    ]


def make_signals(n: int, rate_hz: float = 1000.0, seed: int = 7) -> tuple[Signals, dict[str, np.ndarray]]:
    """An invented blowdown with noise, valve pulses, a dropout, a leak flag and a few out-of-range samples."""
    rng = np.random.default_rng(seed)
    t = np.arange(n) / rate_hz
    span = t[-1] if n > 1 else 1.0
    tank = 2.0e7 * (1.0 - 0.95 * t / span) + rng.normal(0.0, 2e4, n)
    valve = ((t % 10.0) < 3.0).astype(float)
    feed = np.where(valve > 0.5, 7e5, 1.0e5) + rng.normal(0.0, 5e3, n)
    flow = np.where(valve > 0.5, 2e-3, 0.0) + rng.normal(0.0, 1e-5, n)
    flow[(t > 0.3 * span) & (t < 0.3 * span + 2.0)] = np.nan  # a 2 s dropout
    gauge_a = 0.3 * (1.0 - t / span) + 0.01
    gauge_b = gauge_a * (1.0 + rng.normal(0.0, 0.01, n))
    leak = (t > 0.8 * span).astype(float)
    quality = {name: np.zeros(n, dtype=np.uint8) for name in ("tank_pressure", "feed_pressure", "mass_flow")}
    spikes = rng.choice(n, size=max(1, n // 100_000), replace=False)
    quality["tank_pressure"][spikes] = Quality.OUT_OF_RANGE
    tank[spikes] = np.nan
    values = {"tank_pressure": tank, "feed_pressure": feed, "mass_flow": flow, "valve": valve,
              "propellant_flow_gauge_kg": gauge_a, "propellant_pvt_gauge_kg": gauge_b, "leak_suspected": leak}
    return Signals(t, values), quality


def cut(signals: Signals, quality: dict[str, np.ndarray], size: int) -> list[tuple[Signals, dict[str, np.ndarray]]]:
    out = []
    for lo in range(0, len(signals), size):
        hi = lo + size
        out.append((Signals(signals.t_s[lo:hi], {k: v[lo:hi] for k, v in signals.values.items()}),
                    {k: v[lo:hi] for k, v in quality.items()}))
    return out


def run(batches, repeats: int) -> tuple[float, list]:
    best, transitions = np.inf, []
    for _ in range(repeats):
        engine = AlertEngine(ten_rules())
        start = time.perf_counter()
        transitions = [tr for s, q in batches for tr in engine.update(s, q)]
        best = min(best, time.perf_counter() - start)
    return best, transitions


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", type=int, default=1_000_000)
    parser.add_argument("--batch", type=int, default=100)
    args = parser.parse_args()
    signals, quality = make_signals(args.samples)
    whole_s, whole = run([(signals, quality)], repeats=3)
    print(f"10 rules, {args.samples:,} samples in one batch: {whole_s * 1e3:.1f} ms, "
          f"{args.samples / whole_s / 1e6:.2f} M samples/s, {len(whole)} transitions")
    batches = cut(signals, quality, args.batch)
    small_s, small = run(batches, repeats=1)
    print(f"10 rules, {args.samples:,} samples in batches of {args.batch}: {small_s:.2f} s, "
          f"{args.samples / small_s / 1e3:.0f} k samples/s ({small_s / len(batches) * 1e6:.0f} us per batch)")
    def key(trs):  # NaN inputs compare unequal as floats; the log text compares them as written
        return [(tr.t_s, tr.log_text()) for tr in trs]

    if key(small) != key(whole):
        print("MISMATCH: the batched run gave other transitions than the whole-log run")
        return 1
    print("the batched run gave the same transitions as the whole-log run")
    return 0


if __name__ == "__main__":
    sys.exit(main())
