"""Measure the serial-lines driver: parse throughput (no I/O) and end-to-end throughput over a real pty.

Run: python tests/drivers/measure_serial_lines.py [--lines N]   (not a test: it prints figures and asserts nothing
about speed; it does check that no line was lost or changed).
"""

from __future__ import annotations

import argparse
import os
import sys
import threading
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from drivers.line_format import LineFormat  # noqa: E402
from drivers.line_framing import FramedLines, LineSplitter  # noqa: E402
from drivers.line_parsing import parse_lines  # noqa: E402
from drivers.serial_lines import SerialLinesDriver  # noqa: E402
from monitor.clock import MonotonicClock  # noqa: E402

CLOCK = MonotonicClock()
SIX = ("P_tank", "P_feed", "T_tank", "T_feed", "flow", "load")


def stream(n: int, sep: str, rng: np.random.Generator) -> tuple[bytes, np.ndarray]:
    """n lines of t_ms, seq and six values as a small device would print them."""
    values = np.column_stack([rng.normal(200, 5, n), rng.normal(6, 0.1, n), rng.normal(20, 1, n),
                              rng.normal(15, 1, n), rng.normal(12, 0.5, n), rng.normal(1.5, 0.05, n)])
    rows = [f"{i}{sep}{i}{sep}{sep.join(f'{v:.4f}' for v in row)}\n" for i, row in enumerate(values)]
    return "".join(rows).encode(), np.round(values, 4)


def fmt_for(layout: str, port: str | None = None) -> LineFormat:
    return LineFormat(port=port, layout=layout, columns=("t_ms", "seq") + SIX, device_time_field="t_ms",
                      device_time_unit="ms", sequence_field="seq")


def parse_rate(n: int, layout: str, chunk_bytes: int = 4096, repeats: int = 3) -> tuple[float, float]:
    """Best of `repeats`: (lines/s for framing + parsing, lines/s for parse_lines alone)."""
    data, expected = stream(n, "," if layout == "csv" else " ", np.random.default_rng(1))
    fmt = fmt_for(layout)
    best_all = best_parse = 0.0
    for _ in range(repeats):
        splitter = LineSplitter(fmt, mid_stream=False)
        t0 = CLOCK.now()
        framed = FramedLines.concat([splitter.feed(data[i:i + chunk_bytes], 0.0)
                                     for i in range(0, len(data), chunk_bytes)])
        t1 = CLOCK.now()
        raw = parse_lines(framed.lines, framed.t_s, fmt, framed.status)
        t2 = CLOCK.now()
        assert raw.ok.all() and len(raw) == n and np.array_equal(raw.values, expected)
        best_all = max(best_all, n / (t2 - t0))
        best_parse = max(best_parse, n / (t2 - t1))
    return best_all, best_parse


def pty_rate(n: int, lines_per_s: float | None) -> tuple[float, int]:
    """Write n csv lines into a pty (as fast as possible, or paced) and read them with the driver.

    Returns (lines/s received over the whole run, lines lost or damaged).
    """
    data, expected = stream(n, ",", np.random.default_rng(2))
    offsets = np.concatenate(([0], np.cumsum([len(x) + 1 for x in data.split(b"\n")[:-1]])))
    master, slave = os.openpty()
    driver = SerialLinesDriver(fmt_for("csv", os.ttyname(slave)), CLOCK)
    driver.open()
    os.close(slave)
    os.set_blocking(master, False)
    stop = threading.Event()

    def writer() -> None:
        os.write(master, b"\n")
        start, sent, view = CLOCK.now(), 0, memoryview(data)
        while sent < n and not stop.is_set():
            due = n if lines_per_s is None else int((CLOCK.now() - start) * lines_per_s) + 1
            upto = min(n, due, sent + 2000)
            if upto <= sent:
                CLOCK.sleep(0.0005)
                continue
            piece = view[offsets[sent]:offsets[upto]]
            while piece and not stop.is_set():
                try:
                    piece = piece[os.write(master, piece):]
                except BlockingIOError:
                    CLOCK.sleep(0.0005)
            sent = upto

    thread = threading.Thread(target=writer, daemon=True)
    seqs, values = [], []
    t0 = CLOCK.now()
    thread.start()
    got = 0
    idle = 0
    while got < n and idle < 40:
        raw = driver.read(0.05)
        idle = idle + 1 if len(raw) == 0 else 0
        seqs.append(raw.sequence[raw.ok])
        values.append(raw.values[raw.ok])
        got += int(raw.ok.sum())
    elapsed = CLOCK.now() - t0
    stop.set()
    thread.join(5)
    driver.close()
    os.close(master)
    seq = np.concatenate(seqs)
    vals = np.concatenate(values)
    inside = (seq >= 0) & (seq < n)
    same = np.zeros(seq.size, dtype=bool)
    same[inside] = np.all(vals[inside] == expected[seq[inside]], axis=1)
    lost = n - np.unique(seq[same]).size + int(np.count_nonzero(~same))
    return got / elapsed, lost


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--lines", type=int, default=200_000)
    args = parser.parse_args()
    for layout in ("csv", "whitespace"):
        total, parse_only = parse_rate(args.lines, layout)
        print(f"parse {layout:10s}: framing+parsing {total:12,.0f} lines/s, parse_lines alone {parse_only:12,.0f} "
              f"lines/s (8 fields: time, sequence, 6 values)")
    rate, lost = pty_rate(args.lines, None)
    print(f"pty end-to-end, unthrottled: {rate:12,.0f} lines/s received, {lost} lost or changed of {args.lines}")
    paced = 100_000
    rate, lost = pty_rate(paced, 50_000.0)
    print(f"pty end-to-end, paced at 50,000 lines/s: {rate:12,.0f} lines/s received, {lost} lost or changed "
          f"of {paced}")


if __name__ == "__main__":
    main()
