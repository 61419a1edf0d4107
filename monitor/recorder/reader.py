"""The run-log reader: the header, and the body read on demand with pandas, up to the last complete row."""

from __future__ import annotations

import csv
import io
import math
import mmap
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator, Sequence

import numpy as np
import pandas as pd

from drivers.base import LineStatus
from monitor.errors import LogFormatError, MonitorError
from monitor.recorder.format import (
    _ESCAPED,
    _STATUS_WORDS,
    FIXED_LEFT,
    LINE_KINDS,
    RunLogHeader,
    _read_header,
    unescape_text,
)
from monitor.samples import Batch, LinkEvent

NOTE_SCAN_BLOCK = 1 << 22  # bytes read at a time when scanning for notes


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
            log.warnings.append(
                f"{path}: the last {size - end} bytes are an unfinished row (the run was cut off); they were ignored"
            )
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
        options = dict(
            header=None,
            names=list(names),
            usecols=None if columns is None else wanted,
            dtype=dtype,
            engine="c",
            keep_default_na=False,
            na_values={c: [""] for c in wanted if c not in texts},
            chunksize=chunk_rows,
        )
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
            raise LogFormatError(
                f"{self.path}, line {self._line(bad)}: unknown line status "
                f"{df['status'].iloc[bad]!r}; expected one of {', '.join(_STATUS_WORDS)}"
            )
        raw = df["raw"].to_numpy()[rows].tolist()
        try:
            lines = [unescape_text(text) for text in raw]
        except ValueError:
            bad = next(i for i, text in enumerate(raw) if not _ESCAPED.fullmatch(text) or not text.isascii())
            raise LogFormatError(
                f"{self.path}, line {self._line(int(rows[bad]))}: the raw field is not validly escaped"
            ) from None
        return RawLines(df["t_s"].to_numpy()[rows], lines, status)

    def notes(self, kind: str | None = None) -> list[Note]:
        """The note rows (link events, alerts, ...), optionally only those of one kind letter.

        Notes are rare, so instead of parsing every row the body is scanned for lines that start with a note
        letter (a regular expression over blocks of the file: memory stays small however long the log), and
        only those lines are read as CSV.
        """
        letters = "".join(c for c in "abcdefghijklmnopqrstuvwxyz" if c not in LINE_KINDS) if kind is None else kind
        out: list[Note] = []
        if self.data_end <= self.data_start:
            return out
        with open(self.path, "rb") as f:
            for offset, line in _note_lines(f, letters.encode("ascii"), max(self.data_start - 1, 0), self.data_end):
                row = next(csv.reader([line.decode("ascii", "replace")]))
                try:
                    text = unescape_text(row[-1]).decode("utf-8", "replace")
                    t_s = float(row[1]) if row[1] else math.nan
                except (ValueError, IndexError):
                    line_number = self._line(_count_lines(f, self.data_start, offset))
                    raise LogFormatError(f"{self.path}, line {line_number}: the text is not validly escaped") from None
                out.append(Note(row[0], t_s, row[-2], text))
        return out

    def line_time_span(self) -> tuple[float, float]:
        """t_s of the first and the last line row ('s' or 'b'), read from the file's two ends; NaN if none."""
        if self.data_end <= self.data_start:
            return math.nan, math.nan
        with open(self.path, "rb") as f, mmap.mmap(f.fileno(), 0, access=mmap.ACCESS_READ) as body:
            starts = _line_starts(body, self.data_start, self.data_end)
            first = next((t for t in map(lambda s: _line_time(body, s), starts) if t is not None), math.nan)
            ends = _line_starts_backwards(body, self.data_start, self.data_end)
            last = next((t for t in map(lambda s: _line_time(body, s), ends) if t is not None), math.nan)
        return first, last

    def events(self) -> list[LinkEvent]:
        """The link events ('e' rows)."""
        return [LinkEvent(n.t_s, n.label, n.text) for n in self.notes("e")]

    def alerts(self) -> list[Note]:
        """The alert transitions ('a' rows): label and text as the alert engine wrote them."""
        return self.notes("a")

    def _sample_columns(self) -> list[str]:
        h = self.header
        return list(FIXED_LEFT) + [c.column for c in h.channels] + [c.quality_column for c in h.channels]

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
                row = int(np.flatnonzero(~df["kind"].isin([k for k in df["kind"].cat.categories if k not in bad]).to_numpy())[0])
                raise LogFormatError(
                    f"{self.path}, line {self._line(first_row + row)}: row kind "
                    f"{df['kind'].iloc[row]!r} is not one lower-case letter"
                )
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


def _note_lines(f, letters: bytes, start: int, end: int, block: int = NOTE_SCAN_BLOCK) -> Iterator[tuple[int, bytes]]:
    """(offset, row) of each row in the file's bytes start..end that begins with one of `letters` and a comma,
    in file order; byte start must be a line feed (or the byte before the body). The file is read in blocks
    and searched with a regular expression; a row cut by a block's end is searched with the next block."""
    first = re.escape(letters) if len(letters) == 1 else b"[" + re.escape(letters) + b"]"  # a literal is faster
    pattern = re.compile(rb"\n(" + first + rb",[^\n]*)(?=\n)")
    position = start
    while position < end:
        f.seek(position)
        data = f.read(min(block, end - position))
        if not data:
            return
        final = position + len(data) >= end
        last = len(data) - 1 if final else data.rfind(b"\n")  # rows up to here are complete
        if last <= 0 and not final:  # one row longer than the block: read more at once
            block *= 2
            continue
        for match in pattern.finditer(data, 0, last + 1):
            yield position + match.start(1), match.group(1)
        if final:
            return
        position += last  # the next block starts at this line feed


def _count_lines(f, start: int, offset: int) -> int:
    """Line feeds in the file's bytes start..offset."""
    f.seek(start)
    count, left = 0, offset - start
    while left > 0:
        data = f.read(min(NOTE_SCAN_BLOCK, left))
        if not data:
            break
        count += data.count(b"\n")
        left -= len(data)
    return count


def _line_starts(body, start: int, end: int) -> Iterator[int]:
    """Offsets of the rows in body[start:end], first to last."""
    at = start
    while at < end:
        yield at
        found = body.find(b"\n", at, end)
        if found < 0:
            return
        at = found + 1


def _line_starts_backwards(body, start: int, end: int) -> Iterator[int]:
    """Offsets of the rows in body[start:end] (which ends in a line feed), last to first."""
    at = end - 1
    while at > start:
        found = body.rfind(b"\n", start, at)
        yield start if found < 0 else found + 1
        at = found
        if found < 0:
            return


def _line_time(body, start: int) -> float | None:
    """t_s of the row at start if it is a line row ('s' or 'b') with a readable time; None otherwise."""
    head = body[start : start + 64].split(b",", 2)
    if len(head) < 3 or head[0].decode("ascii", "replace") not in LINE_KINDS:
        return None
    try:
        return float(head[1])
    except ValueError:
        return None


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
        quality={c.name: np.ascontiguousarray(s[c.quality_column].to_numpy(dtype=np.uint8)) for c in header.channels},
        device_time_s=device,
        sequence=seq,
    )


def _slice(b: Batch, lo: int, hi: int, final: bool = False) -> Batch:
    """Samples lo..hi of b; final: device_time_s (sequence) becomes None if none of them has one."""

    def cut(a, absent):
        part = a[lo:hi]
        return None if final and absent(part).all() else part

    return Batch(
        t_s=b.t_s[lo:hi],
        values={k: v[lo:hi] for k, v in b.values.items()},
        quality={k: v[lo:hi] for k, v in b.quality.items()},
        device_time_s=cut(b.device_time_s, np.isnan),
        sequence=cut(b.sequence, lambda a: a < 0),
    )
