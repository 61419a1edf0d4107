"""The run log: ejecta's append-only, crash-safe text record of a run, its writer and its reader.

Format version 1 is specified in docs/run-log.md. In short: an ASCII file of '#' header lines (magic and
version, header line count, software version, start time, channels, the rig file line by line), then one CSV
column row and one CSV row per received line or note. Text that could hold anything (raw lines, rig lines,
note texts) is written with one escape rule (escape_bytes), so the file is pure ASCII, no header line holds a
double quote, and every byte round-trips.
"""

from __future__ import annotations

import io
import os
import re
import threading
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path
from typing import Iterator, Sequence

import numpy as np
import pandas as pd

from drivers.base import LineStatus
from monitor import __version__
from monitor.clock import Clock
from monitor.errors import ConfigError, LogFormatError, MonitorError
from monitor.samples import Batch, LinkEvent, SourceReading
from monitor.units import SI_UNITS

FORMAT_NAME = "ejecta-run-log"
FORMAT_VERSION = 1
FIXED_LEFT = ("kind", "t_s", "device_t_s", "seq")
FIXED_RIGHT = ("status", "raw")
LINE_KINDS = ("s", "b")  # a good line (sample) and a bad line; every other letter is a note
# SI unit symbol and column-name suffix of each kind of quantity in monitor.units.SI_UNITS.
SI_COLUMNS: dict[str, tuple[str, str]] = {
    "pressure": ("Pa", "pa"), "temperature": ("K", "k"), "length": ("m", "m"), "area": ("m^2", "m2"),
    "volume": ("m^3", "m3"), "mass": ("kg", "kg"), "force": ("N", "n"), "time": ("s", "s"),
    "velocity": ("m/s", "m_s"), "acceleration": ("m/s^2", "m_s2"), "mass_flow": ("kg/s", "kg_s"),
    "angle": ("rad", "rad"), "impulse": ("N*s", "n_s"), "energy": ("J", "j"), "dimensionless": ("1", ""),
}
_SAFE = bytes(b for b in range(0x20, 0x7F) if b not in b'"\\')
_ESCAPED = re.compile(r'(?:[ !#-\[\]-~]|\\[\\tnr]|\\x[0-9a-fA-F]{2})*')
_NAME = re.compile(r"^[a-z][a-z0-9_]*$")
_KEY = re.compile(r"^# ([a-z][a-z0-9-]*)(?:: ?(.*))?$")
_LABEL = re.compile(r"^[A-Za-z0-9_.+-]*$")
_STATUS_WORDS = {s.name.lower(): int(s) for s in LineStatus}
_STATUS_TABLE = np.array([None] * 256, dtype=object)
for _word, _code in _STATUS_WORDS.items():
    _STATUS_TABLE[_code] = _word
_QUALITY_TABLE = np.array([""] + [str(q) for q in range(1, 256)], dtype=object)


def escape_bytes(data: bytes) -> str:
    """Printable ASCII except '"' and '\\' as is; '\\\\', '\\t', '\\n', '\\r'; any other byte as '\\xhh'."""
    if not data.translate(None, _SAFE):
        return data.decode("ascii")
    # unicode_escape of a latin-1 decoded string escapes exactly the bytes above but for '"'
    return data.decode("latin-1").encode("unicode_escape").decode("ascii").replace('"', "\\x22")


def unescape_text(text: str) -> bytes:
    """The bytes that escape_bytes turned into `text`.

    Raises:
        ValueError: text is not something escape_bytes can produce (a stray backslash, non-ASCII).
    """
    if "\\" not in text and text.isascii():
        return text.encode("ascii")
    if not _ESCAPED.fullmatch(text):
        raise ValueError(f"not a valid escaped text: {text[:80]!r}")
    return text.encode("ascii").decode("unicode_escape").encode("latin-1")


@dataclass(frozen=True)
class ChannelColumn:
    """One channel as the run log stores it: name, kind of quantity, SI unit and column names."""

    name: str
    quantity: str  # a key of monitor.units.SI_UNITS; pressures are absolute

    def __post_init__(self) -> None:
        if not _NAME.match(self.name):
            raise ConfigError("channel name", self.name, "snake_case: a lower-case letter, then a-z, 0-9, _")
        if self.quantity not in SI_COLUMNS:
            raise ConfigError(f"channel {self.name} quantity", self.quantity, "one of " + ", ".join(SI_UNITS))

    @property
    def unit(self) -> str:
        return SI_COLUMNS[self.quantity][0]

    @property
    def column(self) -> str:
        suffix = SI_COLUMNS[self.quantity][1]
        return self.name if not suffix or self.name.endswith("_" + suffix) else f"{self.name}_{suffix}"

    @property
    def quality_column(self) -> str:
        return f"{self.name}_q"


@dataclass(frozen=True)
class RunLogHeader:
    """Everything the header says; `extra` keeps keys this version does not interpret, in file order."""

    software: str
    started_utc: datetime | None  # None: "unknown" (an import whose source gave no wall-clock time)
    started_t_s: float  # the run clock's reading at started_utc, s
    rig_text: str
    rig_source: str
    channels: tuple[ChannelColumn, ...]
    extra: tuple[tuple[str, str], ...] = ()
    format_version: int = FORMAT_VERSION

    @property
    def columns(self) -> tuple[str, ...]:
        return (FIXED_LEFT + tuple(c.column for c in self.channels)
                + tuple(c.quality_column for c in self.channels) + FIXED_RIGHT)

    def render(self) -> str:
        """The header lines and the column row, ending with a newline."""
        def esc(text: str) -> str:
            return escape_bytes(text.encode("utf-8", "surrogateescape"))
        started = "unknown" if self.started_utc is None else _utc_text(self.started_utc)
        body = [f"software: {esc(self.software)}", f"started-utc: {started}",
                f"started-t-s: {float(self.started_t_s)!r}", f"rig-source: {esc(self.rig_source)}"]
        body += [f"channel: {c.column} {c.name} {c.quantity} {c.unit}" for c in self.channels]
        body += [f"{key}: {esc(value)}" for key, value in self.extra]
        body += [f"rig: {esc(line)}" for line in self.rig_text.split("\n")]
        lines = [f"{FORMAT_NAME} {FORMAT_VERSION}", f"header-lines: {len(body) + 3}", *body, "end-header"]
        return "".join(f"# {line}\n" for line in lines) + ",".join(self.columns) + "\n"


def _utc_text(when: datetime) -> str:
    if when.tzinfo is None:
        raise ConfigError("started_utc", when, "a timezone-aware datetime")
    return when.astimezone(timezone.utc).isoformat(timespec="microseconds").replace("+00:00", "Z")


class RunLogWriter:
    """Appends a run to a new run log; a listener of the live chain (on_reading, on_event, tick, close).

    Every call writes its rows and flushes them to the operating system before it returns, so a killed
    process loses nothing already handed over; the file is fsynced when fsync_interval_s has passed since
    the last fsync (checked on every call and on tick(), which the owner calls at least every 100 ms), so
    a power cut loses at most about a second.
    """

    def __init__(self, path: str | Path, rig_text: str, channels: Sequence[object], clock: Clock, *,
                 rig_source: str = "", started_utc: datetime | None = None, started_t_s: float | None = None,
                 extra: Sequence[tuple[str, str]] = (), fsync_interval_s: float = 1.0, unknown_start: bool = False):
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
            software=f"ejecta {__version__}", started_utc=started_utc,
            started_t_s=now if started_t_s is None else started_t_s, rig_text=rig_text,
            rig_source=rig_source, channels=cols, extra=tuple(extra))
        text = self.header.render()
        self._names = tuple(c.name for c in cols)
        self._lock = threading.Lock()
        self._last_sync = -np.inf
        self.rows = 0  # rows written after the header
        try:
            self._file = open(self.path, "x", encoding="ascii", newline="")
        except FileExistsError:
            raise ConfigError("run log", str(self.path),
                              "a file that does not exist yet (ejecta never overwrites a run log)") from None
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
        return f"{kind},{t}{empty}{label},\"{escape_bytes(text.encode('utf-8'))}\"\n"

    def _columns(self, raw, batch: Batch) -> tuple[list, list]:
        """Per column: an object array (one str/float/int per row) or None with a literal in lits."""
        n = len(raw)
        status = np.asarray(raw.status, dtype=np.uint8)
        ok = status == LineStatus.OK
        n_ok = int(ok.sum())
        if len(batch) != n_ok:
            raise MonitorError(f"run log: the batch has {len(batch)} samples for {n_ok} good lines")
        if n_ok and not set(batch.values) == set(batch.quality) == set(self._names):
            raise MonitorError(f"run log: batch channels {sorted(batch.values)} (quality: {sorted(batch.quality)})"
                               f" are not the log's {sorted(self._names)}")
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
        add(np.array([escape_bytes(line) for line in raw.lines], dtype=object), "")
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


_KNOWN_KEYS = {"header-lines", "software", "started-utc", "started-t-s", "rig-source", "channel", "rig",
               "end-header", FORMAT_NAME}


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
    out = (np.full(n if n is not None else ok.size, fill, dtype=dtype) if raw_values is None
           else np.array(raw_values, dtype=dtype))
    if good_values is not None:
        out[ok] = good_values
    return out


@dataclass
class RawLines:
    """Every received line of a log, good and bad, in file order: iterate for (t_s, bytes, LineStatus)."""

    t_s: np.ndarray  # run clock, s (NaN where the log has none)
    lines: list[bytes]  # exactly as received, without the terminator
    status: np.ndarray  # LineStatus codes, uint8

    def __len__(self) -> int:
        return len(self.lines)

    def __iter__(self) -> Iterator[tuple[float, bytes, LineStatus]]:
        for t, line, code in zip(self.t_s.tolist(), self.lines, self.status.tolist()):
            yield t, line, LineStatus(code)


@dataclass(frozen=True)
class Note:
    """A row that is not a received line: a link event ('e'), an alert ('a') or another note letter."""

    kind: str
    t_s: float
    label: str
    text: str


@dataclass
class RunLog:
    """A run log opened for reading: the parsed header, and the body read on demand with pandas."""

    path: Path
    header: RunLogHeader
    header_lines: int  # '#' lines; pandas.read_csv(path, skiprows=header_lines) reads the body
    data_start: int  # byte offset of the first row after the column row
    data_end: int  # byte offset just past the last complete row
    truncated_lines: int = 0  # 1 if the file ends in a line cut off by a crash (that line is ignored)
    warnings: list[str] = field(default_factory=list)

    @classmethod
    def open(cls, path: str | Path) -> "RunLog":
        """Read and check the header; find the end of the last complete row.

        Raises:
            LogFormatError: not a run log, a newer format version, or a damaged header (names file and line).
        """
        path = Path(path)
        try:
            with open(path, "rb") as f:
                header, count = _read_header(f, path)
                start = f.tell()
                size = os.fstat(f.fileno()).st_size
                end = _last_line_end(f, start, size)
        except OSError as exc:
            raise LogFormatError(f"{path}: cannot read the run log ({exc})") from exc
        log = cls(path, header, count, start, end)
        if end < size:
            log.truncated_lines = 1
            log.warnings.append(f"{path}: the last {size - end} bytes are an unfinished row (the run was cut "
                                "off); they were ignored")
        return log

    def table(self, columns: Sequence[str] | None = None, chunk_rows: int | None = None):
        """The body as a pandas DataFrame (every row; `columns` limits which are parsed), or an iterator of
        DataFrames of chunk_rows rows. Empty numbers are NaN; kind and status are categorical.

        Raises:
            LogFormatError: a row that is not valid CSV of this log, or a kind that is not a letter.
        """
        names = self.header.columns
        wanted = list(names if columns is None else columns)
        texts = {"kind": "category", "status": "category", "raw": str}
        dtype = {c: texts.get(c, np.float64) for c in wanted}
        options = dict(header=None, names=list(names), usecols=None if columns is None else wanted, dtype=dtype,
                       engine="c",
                       keep_default_na=False, na_values={c: [""] for c in wanted if c not in texts},
                       chunksize=chunk_rows)
        if int(pd.__version__.split(".")[0]) < 3:  # pandas 3 parses floats exactly by default
            options["float_precision"] = "round_trip"
        if self.data_end <= self.data_start:  # a header and no rows (a run that recorded nothing)
            empty = pd.DataFrame({c: pd.Series([], dtype=dtype[c]) for c in wanted})
            return empty if chunk_rows is None else iter(())
        window = io.BufferedReader(_Window(self.path, self.data_start, self.data_end), 1 << 20)
        try:
            result = pd.read_csv(window, **options)
        except (pd.errors.ParserError, ValueError) as exc:
            window.close()
            raise self._error(exc) from exc
        if chunk_rows is None:
            window.close()
            return self._checked(result, 0)
        return self._chunks(result, window)

    def samples(self, chunk_rows: int = 1 << 18) -> pd.DataFrame:
        """The calibrated samples ('s' rows): t_s, device_t_s (s, NaN where absent), seq (int64, -1 where
        absent), one SI column per channel (NaN where not good) and one uint8 quality column per channel."""
        parts = [_samples(chunk, self.header) for chunk in self.table(self._sample_columns(), chunk_rows=chunk_rows)]
        if not parts:
            return _samples(self.table(self._sample_columns()), self.header)
        return pd.concat(parts, ignore_index=True) if len(parts) > 1 else parts[0]

    def batches(self, size: int, chunk_rows: int = 262_144) -> Iterator[Batch]:
        """The samples as monitor.samples.Batch objects of `size` samples (the last may be shorter), for
        replay. A Batch's device_time_s (sequence) is None when none of its samples has one."""
        if size < 1:
            raise MonitorError(f"batches: size = {size!r}, expected 1 or more")
        pending: list[Batch] = []
        held = 0
        for chunk in self.table(self._sample_columns(), chunk_rows=max(chunk_rows, size)):
            pending.append(_to_batch(_samples(chunk, self.header), self.header))
            held += len(pending[-1])
            if held >= size:
                joined = Batch.concat(pending)
                cut = held - held % size
                for lo in range(0, cut, size):
                    yield _slice(joined, lo, lo + size, final=True)
                pending, held = [_slice(joined, cut, held)], held - cut
        if held:
            yield _slice(Batch.concat(pending), 0, held, final=True)

    def raw_lines(self) -> RawLines:
        """Every received line ('s' and 'b' rows) exactly as received, with its receive time and status.

        Raises:
            LogFormatError: a raw field that is not validly escaped, or an unknown status word.
        """
        df = self.table(["kind", "t_s", "status", "raw"])
        rows = np.flatnonzero(df["kind"].isin(LINE_KINDS).to_numpy())
        words = df["status"].cat.categories.tolist()
        unknown = [w for w in words if w not in _STATUS_WORDS]
        codes = np.array([_STATUS_WORDS.get(w, 255) for w in words] + [255], dtype=np.uint8)
        status = codes[df["status"].cat.codes.to_numpy()[rows]]
        if unknown and (status == 255).any():
            bad = int(rows[np.flatnonzero(status == 255)[0]])
            raise LogFormatError(f"{self.path}, line {self._line(bad)}: unknown line status "
                                 f"{df['status'].iloc[bad]!r}; expected one of {', '.join(_STATUS_WORDS)}")
        raw = df["raw"].to_numpy()[rows].tolist()
        try:
            lines = [unescape_text(text) for text in raw]
        except ValueError:
            bad = next(i for i, text in enumerate(raw) if not _ESCAPED.fullmatch(text) or not text.isascii())
            raise LogFormatError(f"{self.path}, line {self._line(int(rows[bad]))}: the raw field is not "
                                 "validly escaped") from None
        return RawLines(df["t_s"].to_numpy()[rows], lines, status)

    def notes(self, kind: str | None = None) -> list[Note]:
        """The note rows (link events, alerts, ...), optionally only those of one kind letter."""
        df = self.table(["kind", "t_s", "status", "raw"])
        keep = ~df["kind"].isin(LINE_KINDS) if kind is None else df["kind"] == kind
        out = []
        for i in np.flatnonzero(keep.to_numpy()).tolist():
            try:
                text = unescape_text(df["raw"].iat[i]).decode("utf-8", "replace")
            except ValueError:
                raise LogFormatError(f"{self.path}, line {self._line(i)}: the text is not validly escaped") from None
            out.append(Note(df["kind"].iat[i], float(df["t_s"].iat[i]), df["status"].iat[i], text))
        return out

    def events(self) -> list[LinkEvent]:
        """The link events ('e' rows)."""
        return [LinkEvent(n.t_s, n.label, n.text) for n in self.notes("e")]

    def alerts(self) -> list[Note]:
        """The alert transitions ('a' rows): label and text as the alert engine wrote them."""
        return self.notes("a")

    def _sample_columns(self) -> list[str]:
        h = self.header
        return (list(FIXED_LEFT) + [c.column for c in h.channels] + [c.quality_column for c in h.channels])

    def _line(self, row: int) -> int:
        """1-based line number in the file of body row `row` (0-based)."""
        return self.header_lines + 2 + row

    def _error(self, exc: Exception) -> LogFormatError:
        match = re.search(r"line (\d+)", str(exc))
        where = f", line {self._line(int(match.group(1)) - 1)}" if match else ""
        return LogFormatError(f"{self.path}{where}: not a valid run log row ({exc})")

    def _checked(self, df: pd.DataFrame, first_row: int) -> pd.DataFrame:
        if "kind" in df.columns:
            bad = [k for k in df["kind"].cat.categories if not (len(k) == 1 and "a" <= k <= "z")]
            if bad or df["kind"].isna().any():
                row = int(np.flatnonzero(~df["kind"].isin(
                    [k for k in df["kind"].cat.categories if k not in bad]).to_numpy())[0])
                raise LogFormatError(f"{self.path}, line {self._line(first_row + row)}: row kind "
                                     f"{df['kind'].iloc[row]!r} is not one lower-case letter")
        return df

    def _chunks(self, reader, window) -> Iterator[pd.DataFrame]:
        first = 0
        try:
            with reader:
                while True:
                    try:
                        chunk = next(reader)
                    except StopIteration:
                        return
                    except (pd.errors.ParserError, ValueError) as exc:
                        raise self._error(exc) from exc
                    yield self._checked(chunk, first)
                    first += len(chunk)
        finally:
            window.close()


class _Window(io.RawIOBase):
    """Bytes start..end of a file, so pandas sees the body and never the cut-off last line."""

    def __init__(self, path: Path, start: int, end: int):
        self._f = open(path, "rb")
        self._f.seek(start)
        self._left = end - start

    def readable(self) -> bool:
        return True

    def readinto(self, buffer) -> int:
        n = min(len(buffer), self._left)
        if n <= 0:
            return 0
        got = self._f.readinto(memoryview(buffer)[:n]) or 0
        self._left -= got
        return got

    def close(self) -> None:
        self._f.close()
        super().close()


def _read_header(f, path: Path) -> tuple[RunLogHeader, int]:
    def damaged(number: int, what: str) -> LogFormatError:
        return LogFormatError(f"{path}, line {number}: damaged run log header: {what}")

    first = f.readline(256)
    magic = f"# {FORMAT_NAME} ".encode()
    if not first.startswith(magic):
        raise LogFormatError(f"{path}, line 1: not an ejecta run log (expected it to start with "
                             f"{magic.decode().strip()!r}, found {first[:40]!r})")
    version_text = first[len(magic):].strip()
    if not version_text.isdigit():
        raise damaged(1, f"format version {version_text!r} is not a whole number")
    if int(version_text) > FORMAT_VERSION:
        raise LogFormatError(f"{path}, line 1: run log format {int(version_text)} was written by a newer "
                             f"ejecta; this ejecta ({__version__}) reads format {FORMAT_VERSION} and older")
    if int(version_text) < 1:
        raise damaged(1, f"format version {int(version_text)}")
    values: dict[str, str] = {}
    channels: list[ChannelColumn] = []
    rig: list[str] = []
    extra: list[tuple[str, str]] = []
    count = None
    number = 1
    ended = False
    while count is None or number < count:
        number += 1
        raw = f.readline(1 << 20)
        if not raw.endswith(b"\n"):
            raise damaged(number, "the file ends inside the header" if len(raw) < (1 << 20) else "too long")
        try:
            match = _KEY.match(raw[:-1].decode("ascii"))
        except UnicodeDecodeError:
            match = None
        if not match:
            raise damaged(number, f"expected '# key: value', found {raw[:60]!r}")
        key, value = match.group(1), match.group(2) or ""
        if number == 2:
            if key != "header-lines" or not value.isdigit() or int(value) < 3:
                raise damaged(2, "expected '# header-lines: N' with N of 3 or more")
            count = int(value)
            continue
        try:
            text = unescape_text(value).decode("utf-8", "surrogateescape")
        except ValueError:
            raise damaged(number, f"{key}: not validly escaped") from None
        if key == "end-header":
            if number != count:
                raise damaged(number, f"end-header on line {number}, header-lines says {count}")
            ended = True
        elif key == "channel":
            try:
                channels.append(_channel(value))
            except ValueError as exc:
                raise damaged(number, str(exc)) from None
        elif key == "rig":
            rig.append(text)
        elif key in ("software", "started-utc", "started-t-s", "rig-source"):
            if key in values:
                raise damaged(number, f"{key} given twice")
            values[key] = text
        else:
            extra.append((key, text))
    if not ended:
        raise damaged(number, f"no end-header line where header-lines ({count}) says the header ends")
    missing = [k for k in ("software", "started-utc", "started-t-s") if k not in values]
    if missing:
        raise damaged(count, "missing " + ", ".join(missing))
    try:
        started = None if values["started-utc"] == "unknown" else datetime.fromisoformat(values["started-utc"])
        started_t_s = float(values["started-t-s"])
    except ValueError as exc:
        raise damaged(count, f"start time ({exc})") from None
    if started is not None and started.tzinfo is None:
        raise damaged(count, "started-utc has no time zone")
    header = RunLogHeader(values["software"], started, started_t_s, "\n".join(rig), values.get("rig-source", ""),
                          tuple(channels), tuple(extra), int(version_text))
    row = f.readline(1 << 20)
    if row.rstrip(b"\r\n").decode("ascii", "replace") != ",".join(header.columns) or not row.endswith(b"\n"):
        raise damaged(count + 1, f"the column row does not match the channels: {row[:80]!r}")
    return header, count


def _channel(value: str) -> ChannelColumn:
    """The ChannelColumn of a header channel line's value; ValueError if it is not a valid one."""
    parts = value.split(" ")
    try:
        column = ChannelColumn(parts[1], parts[2])
    except (IndexError, ConfigError):
        raise ValueError(f"channel line {value!r}: expected 'column name quantity unit'") from None
    if len(parts) != 4 or column.column != parts[0] or column.unit != parts[3]:
        raise ValueError(f"channel line {value!r}: expected {column.column} {column.name} {column.quantity} "
                         f"{column.unit}")
    return column


def _last_line_end(f, start: int, size: int) -> int:
    """Byte offset just past the last b'\\n' at or after start (start if there is none)."""
    position = size
    while position > start:
        step = min(1 << 16, position - start)
        f.seek(position - step)
        block = f.read(step)
        found = block.rfind(b"\n")
        if found >= 0:
            return position - step + found + 1
        position -= step
    return start


def _samples(df: pd.DataFrame, header: RunLogHeader) -> pd.DataFrame:
    good = df[df["kind"] == "s"].drop(columns="kind").reset_index(drop=True)
    seq = good["seq"].to_numpy()
    good["seq"] = np.where(np.isnan(seq), -1, seq).astype(np.int64)
    for c in header.channels:
        good[c.quality_column] = good[c.quality_column].fillna(0).to_numpy().astype(np.uint8)
    return good


def _to_batch(s: pd.DataFrame, header: RunLogHeader) -> Batch:
    device = s["device_t_s"].to_numpy(dtype=np.float64)
    seq = s["seq"].to_numpy(dtype=np.int64)
    return Batch(
        t_s=np.ascontiguousarray(s["t_s"].to_numpy(dtype=np.float64)),
        values={c.name: np.ascontiguousarray(s[c.column].to_numpy(dtype=np.float64)) for c in header.channels},
        quality={c.name: np.ascontiguousarray(s[c.quality_column].to_numpy(dtype=np.uint8))
                 for c in header.channels},
        device_time_s=device,
        sequence=seq,
    )


def _slice(b: Batch, lo: int, hi: int, final: bool = False) -> Batch:
    """Samples lo..hi of b; final: device_time_s (sequence) becomes None if none of them has one."""
    def cut(a, absent):
        part = a[lo:hi]
        return None if final and absent(part).all() else part
    return Batch(t_s=b.t_s[lo:hi], values={k: v[lo:hi] for k, v in b.values.items()},
                 quality={k: v[lo:hi] for k, v in b.quality.items()},
                 device_time_s=cut(b.device_time_s, np.isnan), sequence=cut(b.sequence, lambda a: a < 0))
