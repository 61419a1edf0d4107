"""A run log read front to back in chunks, the next chunk parsed on a background thread: the review's source.

Memory stays bounded by a few chunks whatever the log's length, and the parsing partly overlaps with the
engine working on the chunk before (partly: pandas' C reader holds the GIL for much of its work, so the two
threads also take turns; docs/review.md has the measurements).
"""

from __future__ import annotations

import math
import queue
import threading
from dataclasses import dataclass
from typing import Callable, Iterable, Iterator

import numpy as np
import pandas as pd

from drivers.base import LineStatus, RawBatch
from monitor.recorder.format import LINE_KINDS
from monitor.recorder.reader import RunLog
from monitor.samples import Batch, SourceReading

_STATUS_CODES = {s.name.lower(): int(s) for s in LineStatus}
PREFETCH_CHUNKS = 2  # chunks parsed ahead of the consumer


@dataclass
class LineRows:
    """The line rows ('s' and 'b') of a piece of a run log as columns, and the samples of its 's' rows."""

    t_s: np.ndarray
    status: np.ndarray  # LineStatus codes, uint8
    is_sample: np.ndarray
    samples: Batch


def table_columns(log: RunLog) -> list[str]:
    """The columns a replay needs: everything but the raw text (one Python string per row otherwise)."""
    channels = log.header.channels
    return ["kind", "t_s", "device_t_s", "seq", *(c.column for c in channels), *(c.quality_column for c in channels),
            "status"]


def line_rows(table: pd.DataFrame, channels: tuple) -> LineRows:
    """Columns of the line rows of a table read with table_columns (kind and status categorical).

    Status words ejecta does not know read as LineStatus.GARBAGE. Works on numpy arrays throughout: no
    per-row Python, and no pandas row selection when every row is a line (the usual case).
    """
    kinds = table["kind"].cat.categories
    codes = table["kind"].cat.codes.to_numpy()
    line_codes = [i for i, k in enumerate(kinds) if k in LINE_KINDS]
    is_line = np.isin(codes, line_codes)
    every_line = bool(is_line.all())
    sample_code = kinds.get_loc("s") if "s" in kinds else -2
    is_sample = codes == sample_code if every_line else codes[is_line] == sample_code
    words = table["status"].cat.categories
    lookup = np.array([_STATUS_CODES.get(w, int(LineStatus.GARBAGE)) for w in words] + [int(LineStatus.GARBAGE)],
                      dtype=np.uint8)
    status = lookup[table["status"].cat.codes.to_numpy()]  # code -1 (empty) takes the last entry
    all_samples = every_line and bool(is_sample.all())

    def column(name: str, rows: np.ndarray | None) -> np.ndarray:
        values = table[name].to_numpy(dtype=np.float64)
        return values if rows is None else values[rows]

    rows = None if every_line else is_line
    samples_at = None if all_samples else (codes == sample_code)
    seq = column("seq", samples_at)
    batch = Batch(
        t_s=column("t_s", samples_at),
        values={c.name: column(c.column, samples_at) for c in channels},
        quality={c.name: np.nan_to_num(column(c.quality_column, samples_at)).astype(np.uint8) for c in channels},
        device_time_s=column("device_t_s", samples_at),
        sequence=np.where(np.isnan(seq), -1, seq).astype(np.int64),
    )
    return LineRows(t_s=column("t_s", rows), status=status if rows is None else status[rows], is_sample=is_sample,
                    samples=batch)


def prefetched(produce: Callable[[], Iterable], depth: int = PREFETCH_CHUNKS) -> Iterator:
    """Iterate produce() on a background thread, at most `depth` items ahead of the consumer.

    An exception raised while producing is raised here, in the consumer, at the point it was reached.
    Leaving the loop early (break, an exception in the consumer) stops the thread and closes the producer.
    """
    items: queue.Queue = queue.Queue(depth)
    stop = threading.Event()

    def put(entry) -> bool:
        while not stop.is_set():
            try:
                items.put(entry, timeout=0.05)
                return True
            except queue.Full:
                continue
        return False

    def run() -> None:
        source = None
        try:
            source = iter(produce())
            for item in source:
                if not put(("item", item)):
                    return
            put(("end", None))
        except BaseException as exc:  # handed to the consumer, who raises it
            put(("error", exc))
        finally:
            close = getattr(source, "close", None)
            if close is not None:
                close()

    thread = threading.Thread(target=run, name="ejecta-log-reader", daemon=True)
    thread.start()
    try:
        while True:
            kind, item = items.get()
            if kind == "end":
                return
            if kind == "error":
                raise item
            yield item
    finally:
        stop.set()
        thread.join()


class LogStream:
    """A run log as SourceReadings of about chunk_rows rows each, in file order, as fast as they can be parsed.

    Link events ride with the first reading whose last line is at or after them (as ReplaySource hands
    them out); those after the last line come in a final reading without lines. start_s and end_s, the
    log's time span, are known before the first chunk (from the first and last line rows and the events).

    Raises (while iterating):
        LogFormatError: a damaged row; the readings before its chunk have been handed out.
    """

    live = False

    def __init__(self, log: RunLog, chunk_rows: int = 200_000):
        self.log = log
        self.header = log.header
        self.channels = log.header.channels
        self.chunk_rows = chunk_rows
        self.events = log.events()
        self.event_t_s = np.array([e.t_s for e in self.events], dtype=np.float64)
        first, last = log.line_time_span()
        times = [t for t in (first, last, *self.event_t_s.tolist()) if math.isfinite(t)]
        self.start_s = min(times) if times else 0.0
        self.end_s = max(times) if times else 0.0
        self.delivered_s = -math.inf  # log time through which every row and event has been handed out

    def _chunks(self) -> Iterator[LineRows]:
        for table in self.log.table(table_columns(self.log), chunk_rows=self.chunk_rows):
            yield line_rows(table, self.channels)

    def __iter__(self) -> Iterator[SourceReading]:
        next_event = 0
        for rows in prefetched(self._chunks):
            if rows.t_s.size == 0:
                continue
            until = min(float(rows.t_s[-1]), self.end_s)
            upto = max(int(np.searchsorted(self.event_t_s, until, side="right")), next_event)
            yield self._reading(rows, self.events[next_event:upto])
            next_event = upto
            self.delivered_s = max(self.delivered_s, until)
        if next_event < len(self.events):
            empty = LineRows(np.empty(0), np.empty(0, np.uint8), np.empty(0, bool), Batch.empty(
                tuple(c.name for c in self.channels)))
            yield self._reading(empty, self.events[next_event:])
        self.delivered_s = max(self.delivered_s, self.end_s)

    @staticmethod
    def _reading(rows: LineRows, events: list) -> SourceReading:
        n = rows.t_s.size
        raw = RawBatch(t_s=rows.t_s, lines=[b""] * n, status=rows.status, fields=(), values=np.empty((n, 0)),
                       events=list(events))
        return SourceReading(raw=raw, batch=rows.samples)
