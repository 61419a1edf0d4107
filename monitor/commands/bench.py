"""Measure the whole chain without a screen: throughput against a pandas floor, alert latency, memory growth."""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--lines", type=int, default=300_000, help="lines for the throughput run (default 300000)")
    parser.add_argument("--latency-seconds", type=float, default=10.0, help="length of the 1 kHz latency run, s")
    parser.add_argument("--hours", type=float, default=1.0, help="hours of 1 kHz data for the memory run (default 1)")
    parser.add_argument("--skip", choices=("latency", "memory"), action="append", default=[], help="leave a run out")


def run(args: argparse.Namespace) -> int:
    import numpy as np

    from monitor import bench

    print("ejecta bench: parse + calibrate + estimate + alerts + link health + record, bench rig, 6 channels")
    for read_lines in (2_000, 50_000):  # a serial read under load; a replay's or an import's batch
        t = bench.measure_throughput(max(args.lines, 4 * read_lines), chunk_lines=read_lines)
        print(f"throughput      {t.lines_per_s:12,.0f} lines/s   {t.samples_per_s:12,.0f} channel-samples/s"
              f"   (reads of {read_lines:,} lines)")
        print(f"pandas floor    {t.floor_lines_per_s:12,.0f} lines/s   (read_csv, C engine, same bytes, one call)")
        print(f"chain / floor   {t.floor_ratio:12.3f}")
        per_line = t.per_line_us()
        print("  us per line:  " + ", ".join(f"{k} {v:.2f}" for k, v in per_line.items()))
    if "latency" not in args.skip:
        latency = bench.measure_alert_latency(args.latency_seconds)
        if latency.size:
            p50, p99 = np.percentile(latency, [50, 99]) * 1e3
            print(
                f"alert latency   median {p50:.2f} ms, 99th percentile {p99:.2f} ms over {latency.size} alert changes "
                "(1 kHz over a pseudo-terminal, arrival to transition)"
            )
        else:
            print("alert latency   no alert changes were seen")
    if "memory" not in args.skip:
        growth, seconds, size = bench.measure_memory(args.hours)
        lines = args.hours * 3600 * 1000
        print(
            f"memory          {growth / 2**20:+.1f} MB RSS over {args.hours:g} h of 1 kHz data after a minute of warm-up "
            f"({seconds:.1f} s, {lines / max(seconds, 1e-9):,.0f} lines/s, {size / 2**20:,.0f} MB of run log)"
        )
    return 0
