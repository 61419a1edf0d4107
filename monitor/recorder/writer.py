"""The run-log writer: append-only, flushed on every call, fsynced at least every second, never overwriting."""

from __future__ import annotations

import os
import re
import threading
from datetime import datetime, timezone
from pathlib import Path
from typing import Sequence

import numpy as np

from drivers.base import LineStatus
from monitor import __version__
from monitor.clock import Clock
from monitor.errors import ConfigError, MonitorError
from monitor.recorder.format import (
    _KNOWN_KEYS,
    _LABEL,
    _QUALITY_TABLE,
    _SAFE,
    _STATUS_TABLE,
    FIXED_LEFT,
    FIXED_RIGHT,
    LINE_KINDS,
    ChannelColumn,
    RunLogHeader,
    escape_bytes,
)
from monitor.samples import Batch, LinkEvent, SourceReading


class RunLogWriter:
    """Appends a run to a new run log; a listener of the live chain (on_reading, on_event, tick, close).

    Every call writes its rows and flushes them to the operating system before it returns, so a killed
    process loses nothing already handed over; the file is fsynced when fsync_interval_s has passed since
    the last fsync (checked on every call and on tick(), which the owner calls at least every 100 ms), so
    a power cut loses at most about a second.
    """

    def __init__(
        self,
        path: str | Path,
        rig_text: str,
        channels: Sequence[object],
        clock: Clock,
        *,
        rig_source: str = "",
        started_utc: datetime | None = None,
        started_t_s: float | None = None,
        extra: Sequence[tuple[str, str]] = (),
        fsync_interval_s: float = 1.0,
        unknown_start: bool = False,
    ):
        """Create the file (never over an existing one) and write the header.

        Args:
            path: the new file.
            rig_text: the rig file's text, as read (Rig.text).
            channels: ChannelColumns, or objects with .name and .quantity (calibration.ChannelSpec).
            clock: the run's monotonic clock, s; stamps the start and times fsync.
            rig_source: where the rig file came from (Rig.source_path).
            started_utc: wall-clock start, timezone-aware; default now (UTC), or unknown if unknown_start.
            started_t_s: the clock's reading at started_utc, s; default clock.now().
            extra: further (key, text) header lines, e.g. an import's provenance.
            fsync_interval_s: the longest time between fsyncs, s.

        Raises:
            ConfigError: path exists, or a channel or header key is not valid.
            MonitorError: the file cannot be created.
        """
        self.path = Path(path)
        self.clock = clock
        self.fsync_interval_s = float(fsync_interval_s)
        cols = tuple(c if isinstance(c, ChannelColumn) else ChannelColumn(c.name, c.quantity) for c in channels)
        taken = list(FIXED_LEFT + FIXED_RIGHT)
        for c in cols:
            if c.column in taken or c.quality_column in taken:
                raise ConfigError("channel name", c.name, "a name whose columns no other column uses")
            taken += [c.column, c.quality_column]
        for key, _ in extra:
            if not re.fullmatch(r"[a-z][a-z0-9-]*", key) or key in _KNOWN_KEYS:
                raise ConfigError("run log header key", key, "lower-case letters, digits, '-', not a v1 key")
        now = clock.now()
        if started_utc is None and not unknown_start:
            started_utc = datetime.now(timezone.utc)
        self.header = RunLogHeader(
            software=f"ejecta {__version__}",
            started_utc=started_utc,
            started_t_s=now if started_t_s is None else started_t_s,
            rig_text=rig_text,
            rig_source=rig_source,
            channels=cols,
            extra=tuple(extra),
        )
        text = self.header.render()
        self._names = tuple(c.name for c in cols)
        self._lock = threading.Lock()
        self._last_sync = -np.inf
        self.rows = 0  # rows written after the header
        try:
            self._file = open(self.path, "x", encoding="ascii", newline="")
        except FileExistsError:
            raise ConfigError(
                "run log", str(self.path), "a file that does not exist yet (ejecta never overwrites a run log)"
            ) from None
        except OSError as exc:
            raise MonitorError(f"{self.path}: cannot create the run log ({exc})") from exc
        self._write(text, now, sync=True)
        try:  # make the new directory entry itself durable
            dir_fd = os.open(self.path.parent, os.O_RDONLY)
            try:
                os.fsync(dir_fd)
            finally:
                os.close(dir_fd)
        except OSError:
            pass  # some platforms cannot fsync a directory; the file's own fsync still holds

    def __enter__(self) -> "RunLogWriter":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def on_reading(self, reading: SourceReading) -> None:
        """Record every line of reading.raw (good ones with their calibrated sample) and its link events.

        Raises:
            MonitorError: the batch does not match the raw lines or the log's channels; a write failed.
        """
        raw, batch = reading.raw, reading.batch
        events = sorted(raw.events, key=lambda e: e.t_s)
        notes = [self._note("e", ev.t_s, ev.kind, ev.detail) for ev in events]
        if not len(raw):
            if len(batch):
                raise MonitorError(f"run log: the batch has {len(batch)} samples for 0 lines")
            self._write("".join(notes), self.clock.now(), rows=len(notes))
            return
        cols, lits = self._columns(raw, batch)
        t_lines = np.asarray(raw.t_s, dtype=np.float64)
        bounds = [0]
        for ev in events:  # an event goes before the first line received after it
            later = np.flatnonzero(t_lines > ev.t_s)
            bounds.append(max(bounds[-1], int(later[0]) if later.size else len(raw)))
        bounds.append(len(raw))
        parts = [self._rows(cols, lits, bounds[0], bounds[1])]
        for note, lo, hi in zip(notes, bounds[1:-1], bounds[2:]):
            parts.append(note)
            parts.append(self._rows(cols, lits, lo, hi))
        self._write("".join(parts), self.clock.now(), rows=len(raw) + len(events))

    def on_event(self, event: LinkEvent) -> None:
        """Record a link event ('e' row: status = event.kind, raw = event.detail)."""
        self.write_note("e", event.t_s, event.kind, event.detail)

    def write_event(self, t_s: float, kind: str, detail: str = "") -> None:
        """Record a link event given by its parts; t_s on the run clock, s."""
        self.write_note("e", t_s, kind, detail)

    def write_alert(self, t_s: float, text: str, label: str = "alert") -> None:
        """Record an alert transition ('a' row); label says which (e.g. "raised", "cleared")."""
        self.write_note("a", t_s, label, text)

    def write_note(self, kind_letter: str, t_s: float, label: str, text: str) -> None:
        """Record a note row: a lower-case letter other than 's' and 'b', a label word and free text.

        Raises:
            MonitorError: a kind letter or label the format cannot hold.
        """
        self._write(self._note(kind_letter, t_s, label, text), self.clock.now(), rows=1)

    def tick(self, now_s: float | None = None) -> None:
        """Flush, and fsync if fsync_interval_s has passed; call at least every 100 ms when idle."""
        self._write("", self.clock.now() if now_s is None else now_s)

    def close(self) -> None:
        """Flush, fsync and close; later calls do nothing."""
        with self._lock:
            if self._file.closed:
                return
            try:
                self._file.flush()
                os.fsync(self._file.fileno())
            except OSError as exc:
                raise MonitorError(f"{self.path}: cannot finish the run log ({exc})") from exc
            finally:
                self._file.close()

    def stop(self) -> None:
        """The end of a run for a pipeline listener (monitor.pipeline): the same as close()."""
        self.close()

    @property
    def closed(self) -> bool:
        return self._file.closed

    def _write(self, text: str, now: float, sync: bool = False, rows: int = 0) -> None:
        with self._lock:
            if self._file.closed:
                raise MonitorError(f"{self.path}: the run log is closed")
            try:
                if text:
                    self._file.write(text)
                self._file.flush()
                if sync or now - self._last_sync >= self.fsync_interval_s:
                    os.fsync(self._file.fileno())
                    self._last_sync = now
            except OSError as exc:
                raise MonitorError(f"{self.path}: cannot write the run log ({exc})") from exc
            self.rows += rows

    def _note(self, kind: str, t_s: float, label: str, text: str) -> str:
        if len(kind) != 1 or not "a" <= kind <= "z" or kind in LINE_KINDS:
            raise MonitorError(f"run log note kind {kind!r}: expected one lower-case letter, not s or b")
        if not _LABEL.match(label):
            raise MonitorError(f"run log note label {label!r}: expected letters, digits, '_', '.', '+', '-'")
        t = "" if t_s != t_s else repr(float(t_s))
        empty = "," * (len(self.header.columns) - 3)
        return f'{kind},{t}{empty}{label},"{escape_bytes(text.encode("utf-8"))}"\n'

    def _columns(self, raw, batch: Batch) -> tuple[list, list]:
        """Per column: an object array (one str/float/int per row) or None with a literal in lits."""
        n = len(raw)
        status = np.asarray(raw.status, dtype=np.uint8)
        ok = status == LineStatus.OK
        n_ok = int(ok.sum())
        if len(batch) != n_ok:
            raise MonitorError(f"run log: the batch has {len(batch)} samples for {n_ok} good lines")
        if n_ok and not set(batch.values) == set(batch.quality) == set(self._names):
            raise MonitorError(
                f"run log: batch channels {sorted(batch.values)} (quality: {sorted(batch.quality)})"
                f" are not the log's {sorted(self._names)}"
            )
        for name in self._names if n_ok else ():
            for part in (batch.values[name], batch.quality[name]):
                if len(part) != n_ok:
                    raise MonitorError(f"run log: channel {name} has {len(part)} samples for {n_ok} good lines")
        all_ok = n_ok == n
        cols: list = []
        lits: list = []

        def add(values, literal=""):
            cols.append(values)
            lits.append(literal)

        add(None if all_ok else np.where(ok, "s", "b").astype(object), "s")
        floats = [_merge(raw.t_s, batch.t_s, ok, all_ok)]
        dev = None
        if raw.device_time_s is not None or batch.device_time_s is not None:
            dev = _merge(raw.device_time_s, batch.device_time_s, ok, all_ok, n)
            floats.append(dev)
        for name in self._names:
            v = batch.values.get(name, np.empty(0))  # a batch without good lines may lack channels
            floats.append(np.asarray(v, dtype=np.float64) if all_ok else _spread(v, ok, np.nan, np.float64))
        block = np.column_stack([_texts(f) for f in floats])
        add(block[:, 0])
        add(block[:, 1] if dev is not None else None)
        if raw.sequence is not None or batch.sequence is not None:
            seq = _merge(raw.sequence, batch.sequence, ok, all_ok, n, fill=-1, dtype=np.int64)
            seq_o = seq.astype(object)
            seq_o[seq < 0] = ""
            add(seq_o)
        else:
            add(None)
        first_value = 2 if dev is not None else 1
        for k in range(len(self._names)):
            add(block[:, first_value + k])
        for name in self._names:
            q = np.asarray(batch.quality.get(name, ()), dtype=np.uint8)
            add(_QUALITY_TABLE[q if all_ok else _spread(q, ok, 0, np.uint8)] if q.any() else None)
        if all_ok:
            add(None, "ok")
        else:
            words = _STATUS_TABLE[status]
            if any(w is None for w in words[~ok]):
                raise MonitorError(f"run log: unknown line status codes {sorted(set(status.tolist()))}")
            add(words)
        add(np.array(_escaped_lines(raw.lines), dtype=object), "")
        return cols, lits

    @staticmethod
    def _rows(cols: list, lits: list, lo: int, hi: int) -> str:
        if hi <= lo:
            return ""
        live = [c[lo:hi] for c in cols if c is not None]
        template = ",".join("%s" if c is not None else lit for c, lit in zip(cols[:-1], lits[:-1]))
        template += ',"%s"\n'
        matrix = np.empty((hi - lo, len(live)), dtype=object)
        for j, c in enumerate(live):
            matrix[:, j] = c
        return (template * (hi - lo)) % tuple(matrix.ravel().tolist())


def _texts(values: np.ndarray) -> np.ndarray:
    """Each float as an object for '%s' (shortest repr, exact) and '' for NaN; a column with few distinct
    bit patterns (quantised sensor readings) has each distinct value formatted once."""
    bits = values.view(np.int64)
    if values.size >= 64:
        distinct, where = np.unique(bits, return_inverse=True)
        if distinct.size * 4 <= values.size:
            texts = np.array([repr(v) if v == v else "" for v in distinct.view(np.float64).tolist()], dtype=object)
            return texts[where]
    out = values.astype(object)
    out[np.isnan(values)] = ""
    return out


def _spread(values, ok: np.ndarray, fill, dtype) -> np.ndarray:
    out = np.full(ok.shape, fill, dtype=dtype)
    out[ok] = values
    return out


def _merge(raw_values, good_values, ok, all_ok, n=None, fill=np.nan, dtype=np.float64) -> np.ndarray:
    """A per-line column: the raw batch's values, overwritten on good lines by the calibrated batch's."""
    if good_values is not None and all_ok:
        return np.asarray(good_values, dtype=dtype)
    out = np.full(n if n is not None else ok.size, fill, dtype=dtype) if raw_values is None else np.array(raw_values, dtype=dtype)
    if good_values is not None:
        out[ok] = good_values
    return out


def _escaped_lines(lines: list[bytes]) -> list[str]:
    """escape_bytes of each line; when no line holds a byte that needs escaping (the usual case), one decode
    and one split do them all at once."""
    joined = b"\n".join(lines)
    if lines and not joined.translate(None, _SAFE_OR_LF) and joined.count(b"\n") == len(lines) - 1:
        return joined.decode("ascii").split("\n")
    return [escape_bytes(line) for line in lines]


_SAFE_OR_LF = _SAFE + b"\n"
