"""Serial text lines without I/O: the [source] table (LineFormat), cutting bytes into lines, lines into numbers.

The numeric path works on whole batches with numpy: the candidate lines are joined into one buffer, checked
byte-wise (byte classes, separator counts, empty fields) and converted by one numpy call; only the lines that
fail a check go through the per-line reader, which decides their LineStatus. Nothing here raises on bad data.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from drivers.base import LineStatus, RawBatch
from monitor.errors import ConfigError
from monitor.units import parse_quantity

__all__ = ["FramedLines", "LineFormat", "LineSplitter", "header_names", "parse_lines", "word_lines", "xor8"]

_OK, _GARBAGE, _FIELD_COUNT = int(LineStatus.OK), int(LineStatus.GARBAGE), int(LineStatus.FIELD_COUNT)
_BAD_NUMBER, _CHECKSUM = int(LineStatus.BAD_NUMBER), int(LineStatus.CHECKSUM)
_PARTIAL, _TOO_LONG = int(LineStatus.PARTIAL), int(LineStatus.TOO_LONG)

_CONTROL = re.compile(r"[\x00-\x08\x0a-\x1f\x7f]")
_HEX2 = re.compile(rb"[0-9A-Fa-f]{2}")
_PAIR_SPLIT = re.compile(r"[,\s]+")
_COMMA, _SPACE, _TAB = 0x2C, 0x20, 0x09
_NUMBER_CHARS = np.frombuffer(b"0123456789.+-eE", dtype=np.uint8)
_SOURCE_KEYS = ("driver", "port", "baud", "parity", "stop_bits", "line_ending", "layout", "columns", "header",
                "device_time_field", "device_time_unit", "sequence_field", "sequence_modulo", "checksum",
                "max_line_bytes")


def _byte_classes(layout: str) -> np.ndarray:
    """Per byte value: 0 = may appear in a line the numeric fast path reads, 1 = other text, 2 = not text."""
    lut = np.full(256, 2, dtype=np.uint8)
    lut[0x20:0x7F] = 1
    lut[[_SPACE, _TAB]] = 1
    lut[_NUMBER_CHARS] = 0
    if layout != "pairs":
        lut[[_SPACE, _TAB]] = 0
    if layout == "csv":
        lut[_COMMA] = 0
    return lut


_CLASSES = {layout: _byte_classes(layout) for layout in ("csv", "whitespace", "pairs")}


def _valid_name(name: object) -> bool:
    """A column name: printable ASCII without spaces, ',', '=' or '*', and not itself a number."""
    return (isinstance(name, str) and name != "" and all("!" <= c <= "~" and c not in ",=*" for c in name)
            and _number(name) is None)


def _number(token: str) -> float | None:
    """The float a token spells (nan and inf included), or None; digit separators ('_') are refused."""
    if not token or "_" in token:
        return None
    try:
        return float(token)
    except ValueError:
        return None


@dataclass(frozen=True)
class LineFormat:
    """How a device writes its lines and how the port is set up: the [source] table of a serial_lines rig.

    Build it with from_source_table; direct construction runs the same checks. stop_bits is 1, 1.5 or 2;
    device_time_unit is s, ms or us and is required exactly when device_time_field is given.
    """

    port: str | None = None
    baud: int = 115200
    parity: str = "none"
    stop_bits: float = 1.0
    line_ending: str = "lf"
    layout: str = "csv"
    columns: tuple[str, ...] | None = None
    header: bool = False
    device_time_field: str | None = None
    device_time_unit: str | None = None
    sequence_field: str | None = None
    sequence_modulo: int | None = None
    checksum: str = "none"
    max_line_bytes: int = 512
    source_path: str | None = field(default=None, compare=False, repr=False)

    @classmethod
    def from_source_table(cls, table: dict[str, Any], source_path: str | None = None) -> "LineFormat":
        """Check the rig's [source] table and build the format.

        Raises:
            ConfigError: an unknown key, or any key's value of the wrong type or out of range (the message
                names the key, the value and what was expected).
        """
        if not isinstance(table, dict):
            raise ConfigError("source", table, "a table ([source])", source_path)
        for key, value in table.items():
            if key not in _SOURCE_KEYS:
                raise ConfigError(f"source.{key}", value, "no such key for the serial_lines driver (a typo?); "
                                  "known keys: " + ", ".join(_SOURCE_KEYS), source_path)
        if table.get("driver", "serial_lines") != "serial_lines":
            raise ConfigError("source.driver", table["driver"], "'serial_lines' for this driver", source_path)
        return cls(**{k: v for k, v in table.items() if k != "driver"}, source_path=source_path)

    def _fail(self, key: str, value: object, expected: str) -> None:
        raise ConfigError(f"source.{key}", value, expected, self.source_path)

    def _choice(self, key: str, options: tuple[str, ...]) -> None:
        if getattr(self, key) not in options:
            self._fail(key, getattr(self, key), "one of " + ", ".join(repr(o) for o in options))

    def __post_init__(self) -> None:
        if self.port is not None and (not isinstance(self.port, str) or not self.port.strip()):
            self._fail("port", self.port, "a device path or a pyserial URL, as a non-empty string")
        if isinstance(self.baud, bool) or not isinstance(self.baud, int) or not 50 <= self.baud <= 12_000_000:
            self._fail("baud", self.baud, "a whole number of bits per second from 50 to 12000000")
        self._choice("parity", ("none", "even", "odd"))
        if isinstance(self.stop_bits, bool) or self.stop_bits not in (1, 1.5, 2):
            self._fail("stop_bits", self.stop_bits, "1, 1.5 or 2")
        object.__setattr__(self, "stop_bits", float(self.stop_bits))
        self._choice("line_ending", ("lf", "crlf", "cr"))
        self._choice("layout", ("csv", "whitespace", "pairs"))
        self._choice("checksum", ("none", "xor8"))
        if not isinstance(self.header, bool):
            self._fail("header", self.header, "true or false")
        self._check_columns()
        mbytes = self.max_line_bytes
        if isinstance(mbytes, bool) or not isinstance(mbytes, int) or not 16 <= mbytes <= 65536:
            self._fail("max_line_bytes", mbytes, "a whole number of bytes from 16 to 65536")

    def _check_columns(self) -> None:
        cols = self.columns
        if cols is not None:
            if not isinstance(cols, (list, tuple)) or not cols or not all(_valid_name(c) for c in cols):
                self._fail("columns", cols, "a non-empty list of names (printable, no spaces, ',', '=' or '*', "
                           "not numbers)")
            if len(set(cols)) != len(cols):
                self._fail("columns", cols, "names that appear once each")
            object.__setattr__(self, "columns", tuple(cols))
        if self.layout == "pairs" and self.header:
            self._fail("header", self.header, "false with layout = 'pairs' (each pair names its field)")
        if cols is None and not self.header:
            self._fail("columns", None, "the list of field names (or header = true to read them from the device)")
        for key in ("device_time_field", "sequence_field"):
            name = getattr(self, key)
            if name is not None and (not _valid_name(name) or (cols is not None and name not in cols)):
                self._fail(key, name, "one of the columns" if cols is not None else "a column name")
        if self.device_time_field is not None and self.device_time_field == self.sequence_field:
            self._fail("sequence_field", self.sequence_field, "a column other than device_time_field")
        if self.device_time_field is None:
            if self.device_time_unit is not None:
                self._fail("device_time_unit", self.device_time_unit, "no unit unless device_time_field is set")
        else:
            self._choice("device_time_unit", ("s", "ms", "us"))
        modulo = self.sequence_modulo
        if modulo is not None and (isinstance(modulo, bool) or not isinstance(modulo, int) or modulo < 2
                                   or self.sequence_field is None):
            self._fail("sequence_modulo", modulo, "a whole number of at least 2 (the counter's wrap, e.g. "
                       "65536), and only with sequence_field")
        if cols is not None and not self.fields:
            self._fail("columns", cols, "at least one column besides device_time_field and sequence_field")

    @property
    def fields(self) -> tuple[str, ...]:
        """The value fields in column order (the columns without device time and sequence); () if from a header."""
        return self.value_fields(self.columns or ())

    def value_fields(self, names: tuple[str, ...]) -> tuple[str, ...]:
        return tuple(n for n in names if n not in (self.device_time_field, self.sequence_field))

    @property
    def device_time_scale_s(self) -> float:
        """Seconds per count of the device time field (1.0 when there is none)."""
        if self.device_time_unit is None:
            return 1.0
        return parse_quantity(f"1 {self.device_time_unit}", "time", "source.device_time_unit", self.source_path)


@dataclass
class FramedLines:
    """Complete lines cut from a byte stream: content without terminators, receive time, framing status."""

    lines: list[bytes]
    t_s: np.ndarray  # receive time of the chunk that completed each line, s
    status: np.ndarray  # uint8 LineStatus: OK, PARTIAL or TOO_LONG

    def __len__(self) -> int:
        return len(self.lines)

    @classmethod
    def concat(cls, parts: list["FramedLines"]) -> "FramedLines":
        """Join framed lines end to end."""
        lines: list[bytes] = []
        for part in parts:
            lines.extend(part.lines)
        return cls(lines, np.concatenate([p.t_s for p in parts] or [np.empty(0)]),
                   np.concatenate([p.status for p in parts] or [np.empty(0, dtype=np.uint8)]).astype(np.uint8))


class LineSplitter:
    """Cuts chunks of bytes into lines at the format's terminator, keeping the unfinished tail between chunks.

    lf and crlf end a line at LF and drop one CR before it; cr ends it at CR and drops one LF right after it.
    Empty lines are skipped. The first fragment after (re)opening mid-stream is marked PARTIAL (unless it is
    empty: then the stream was at a line boundary). A line longer than max_line_bytes becomes one TOO_LONG line
    holding its first max_line_bytes bytes; the rest of it, up to the terminator, is dropped. The lines
    produced do not depend on how the stream was cut into chunks; their times do (each line gets the receive
    time of the chunk that completed it).
    """

    def __init__(self, fmt: LineFormat, mid_stream: bool = True):
        self.max_bytes = fmt.max_line_bytes
        self.cr = fmt.line_ending == "cr"
        self.term = b"\r" if self.cr else b"\n"
        self.reset(mid_stream)

    def reset(self, mid_stream: bool = True) -> None:
        """Forget the tail, as after (re)opening the port; mid_stream marks the next first fragment PARTIAL."""
        self._tail = b""
        self._first = mid_stream
        self._discarding = False
        self._after_cr = False

    def feed(self, chunk: bytes, t_s: float) -> FramedLines:
        """The lines completed by this chunk, all stamped with its receive time t_s (s)."""
        lines: list[bytes] = []
        status: list[int] = []
        if self._discarding:
            cut = chunk.find(self.term)
            if cut < 0:
                return self._framed(lines, status, t_s)
            chunk, self._discarding, self._after_cr = chunk[cut + 1:], False, self.cr
        if self._after_cr and chunk:
            self._after_cr = False
            if chunk[:1] == b"\n" and not self._tail:
                chunk = chunk[1:]
        if not chunk:
            return self._framed(lines, status, t_s)
        buf = self._tail + chunk
        if self.cr:
            self._after_cr = buf.endswith(b"\r")
            if b"\n" in buf:
                buf = buf.replace(b"\r\n", b"\r")
        elif b"\r" in buf:
            buf = buf.replace(b"\r\n", b"\n")
        parts = buf.split(self.term)
        self._tail = parts.pop()
        if self._first and parts:
            first, parts, self._first = parts[0], parts[1:], False
            if first:
                lines.append(first[: self.max_bytes])
                status.append(_TOO_LONG if len(first) > self.max_bytes else _PARTIAL)
        if parts:
            if b"" in parts:
                parts = [p for p in parts if p]
            if parts and max(map(len, parts)) > self.max_bytes:
                for p in parts:
                    lines.append(p[: self.max_bytes])
                    status.append(_TOO_LONG if len(p) > self.max_bytes else _OK)
            else:
                lines.extend(parts)
                status.extend([_OK] * len(parts))
        tail = self._tail
        if len(tail) > self.max_bytes + 1 or (len(tail) == self.max_bytes + 1 and (self.cr or tail[-1:] != b"\r")):
            lines.append(tail[: self.max_bytes])
            status.append(_TOO_LONG)
            self._tail, self._discarding, self._first = b"", True, False
        return self._framed(lines, status, t_s)

    def flush(self, t_s: float) -> FramedLines:
        """End of stream (link lost): the unfinished tail, if any, as one PARTIAL line; then reset()."""
        tail = b"" if self._discarding else self._tail
        if not self.cr and tail.endswith(b"\r"):
            tail = tail[:-1]
        self.reset(mid_stream=True)
        return self._framed([tail] if tail else [], [_PARTIAL] if tail else [], t_s)

    @staticmethod
    def _framed(lines: list[bytes], status: list[int], t_s: float) -> FramedLines:
        return FramedLines(lines, np.full(len(lines), float(t_s)), np.array(status, dtype=np.uint8))


def xor8(data: bytes) -> int:
    """XOR of all bytes: the NMEA 0183 sentence checksum, taken over the text between '$' and '*'."""
    arr = np.frombuffer(data, dtype=np.uint8)
    return int(np.bitwise_xor.reduce(arr)) if arr.size else 0


def parse_lines(lines: list[bytes], t_s: np.ndarray, fmt: LineFormat, status: np.ndarray | None = None,
                wire_columns: tuple[str, ...] | None = None, fields: tuple[str, ...] | None = None) -> RawBatch:
    """Read framed lines into a RawBatch: one row per line, good or bad, raw bytes kept.

    Args:
        lines: line contents without terminators.
        t_s: receive time of each line, s.
        fmt: the line format.
        status: framing status per line (PARTIAL, TOO_LONG rows are kept raw, not read); default all OK.
        wire_columns: the column order on the wire when a header line gave it; default fmt.columns. None with
            fmt.columns None (header awaited) marks every line FIELD_COUNT.
        fields: the value fields to return, in order; default fmt.fields, or those of wire_columns.

    Returns:
        The batch; bad rows have NaN values, NaN device time and sequence -1. NaN and inf on the wire are
        returned as they are (calibration flags them).
    """
    n = len(lines)
    t_s = np.asarray(t_s, dtype=np.float64)
    status = np.zeros(n, dtype=np.uint8) if status is None else np.array(status, dtype=np.uint8)
    wire = tuple(wire_columns) if wire_columns is not None else fmt.columns
    if fields is None:
        fields = fmt.fields if fmt.columns is not None else fmt.value_fields(wire or ())
    table = np.full((n, len(wire or ())), np.nan)
    present = None
    if wire is None:
        status[status == _OK] = _FIELD_COUNT
    else:
        bodies = _check_xor8(lines, status) if fmt.checksum == "xor8" else lines
        if fmt.layout == "pairs":
            present = np.zeros(table.shape, dtype=bool)
            _read_pairs(bodies, status, {name: j for j, name in enumerate(wire)}, table, present)
        else:
            _read_table(bodies, status, fmt.layout == "csv", table)
    return _assemble(list(lines), t_s, status, table, present, wire or (), tuple(fields), fmt)


def _assemble(lines: list[bytes], t_s: np.ndarray, status: np.ndarray, table: np.ndarray,
              present: np.ndarray | None, wire: tuple[str, ...], fields: tuple[str, ...], fmt: LineFormat) -> RawBatch:
    n = len(lines)
    position = {name: j for j, name in enumerate(wire)}

    def column(name: str) -> tuple[np.ndarray, np.ndarray]:
        j = position.get(name)
        if j is None:
            return np.full(n, np.nan), np.zeros(n, dtype=bool)
        return table[:, j], (present[:, j] if present is not None else np.ones(n, dtype=bool))

    sequence = None
    if fmt.sequence_field is not None:
        seq, given = column(fmt.sequence_field)
        with np.errstate(invalid="ignore"):
            whole = np.isfinite(seq) & (seq >= 0) & (seq == np.floor(seq)) & (seq < 2.0**62)
        status[(status == _OK) & given & ~whole] = _BAD_NUMBER
        sequence = np.where(whole & (status == _OK), seq, -1).astype(np.int64)
    bad = status != _OK
    device_time = None
    if fmt.device_time_field is not None:
        device_time = column(fmt.device_time_field)[0] * fmt.device_time_scale_s
        device_time[bad] = np.nan
    values = np.full((n, len(fields)), np.nan)
    for k, name in enumerate(fields):
        if name in position:
            values[:, k] = table[:, position[name]]
    values[bad] = np.nan
    return RawBatch(t_s=t_s, lines=lines, status=status, fields=fields, values=values,
                    device_time_s=device_time, sequence=sequence)


def _check_xor8(lines: list[bytes], status: np.ndarray) -> list[bytes]:
    """Mark lines whose '*HH' checksum is missing or wrong CHECKSUM; return the bodies ('$' and '*HH' cut off)."""
    bodies = list(lines)
    rows, given, parts = [], [], []
    for i in np.flatnonzero(status == _OK).tolist():
        line = lines[i]
        star = line.rfind(b"*")
        if star < 0 or not _HEX2.fullmatch(line, star + 1):
            status[i] = _CHECKSUM
            continue
        bodies[i] = line[1 if line[:1] == b"$" else 0: star]
        rows.append(i)
        given.append(int(line[star + 1:], 16))
        parts.append(bodies[i])
    if rows:
        lengths = np.fromiter(map(len, parts), dtype=np.int64, count=len(parts))
        starts = np.concatenate(([0], np.cumsum(lengths)[:-1]))
        computed = np.zeros(len(parts), dtype=np.int64)
        buf = np.frombuffer(b"".join(parts), dtype=np.uint8)
        filled = lengths > 0
        if buf.size:
            computed[filled] = np.bitwise_xor.reduceat(buf, starts[filled])
        rows_a = np.asarray(rows)
        status[rows_a[computed != np.asarray(given)]] = _CHECKSUM
    return bodies


def _read_table(bodies: list[bytes], status: np.ndarray, csv: bool, out: np.ndarray) -> None:
    """Fill `out` rows for csv or whitespace lines: one numpy conversion for the clean lines, per line for the rest."""
    todo = np.flatnonzero(status == _OK)
    if todo.size == 0:
        return
    ncols = out.shape[1]
    sub = bodies if todo.size == len(bodies) else [bodies[i] for i in todo.tolist()]
    k = len(sub)
    sep = b"," if csv else b" "
    joined = sep.join(sub)
    buf = np.frombuffer(joined, dtype=np.uint8)
    lengths = np.fromiter(map(len, sub), dtype=np.int64, count=k)
    starts = np.zeros(k, dtype=np.int64)
    np.cumsum(lengths[:-1] + 1, out=starts[1:])

    def line_of(pos: np.ndarray) -> np.ndarray:
        return np.searchsorted(starts, pos, side="right") - 1

    slow = lengths == 0
    # bytes outside '+' ',' '-' '.' '0'-'9' are few in plain numbers; only those go through the class table
    odd = np.flatnonzero((buf < 0x2B) | (buf > 0x39) | (buf == 0x2F))
    odd = odd[_CLASSES["csv" if csv else "whitespace"][buf[odd]] != 0]
    if odd.size:
        slow[line_of(odd)] = True
    if csv:
        commas = np.flatnonzero(buf == _COMMA)
        joins = np.searchsorted(commas, starts[1:] - 1)  # where each joining comma sits among all commas
        counts = np.diff(np.concatenate(([-1], joins, [commas.size])))
        _mark_empty_fields(buf, joined, line_of, slow)
    else:
        token = (buf != _SPACE) & (buf != _TAB)
        token[1:] &= ~token[:-1]
        firsts = np.searchsorted(np.flatnonzero(token), starts)  # tokens before each line's start
        counts = np.diff(np.concatenate((firsts, [np.count_nonzero(token)])))
    fast = np.flatnonzero(~slow & (counts == ncols))
    done = np.zeros(k, dtype=bool)
    if fast.size:
        fast_lines = sub if fast.size == k else [sub[i] for i in fast.tolist()]
        values, good = _convert(fast_lines, sep, ncols, joined if fast.size == k else None)
        out[todo[fast[good]]] = values[good]
        done[fast[good]] = True
    for j in np.flatnonzero(~done).tolist():
        code, row = _read_table_line(sub[j], csv, ncols)
        status[todo[j]] = code
        if row is not None:
            out[todo[j]] = row


def _mark_empty_fields(buf: np.ndarray, joined: bytes, line_of, slow: np.ndarray) -> None:
    """Send csv lines with an empty field to the per-line reader: numpy reads one as -1 without complaint."""
    pos = None
    if b" " in joined or b"\t" in joined:  # look at the text with spaces and tabs taken out
        pos = np.flatnonzero((buf != _SPACE) & (buf != _TAB))
        buf = buf[pos]
    comma = buf == _COMMA
    empty = np.flatnonzero(comma[1:] & comma[:-1]) + 1
    if buf.size and (comma[0] or comma[-1]):
        empty = np.concatenate((empty, [0] if comma[0] else [], [buf.size - 1] if comma[-1] else []))
    if empty.size:
        empty = empty.astype(np.int64)
        slow[line_of(empty if pos is None else pos[empty])] = True


def _convert(lines: list[bytes], sep: bytes, ncols: int, joined: bytes | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Lines of exactly ncols clean number fields -> (values, converted); halves the batch around failures."""
    n = len(lines)
    try:
        values = np.fromstring(sep.join(lines) if joined is None else joined, dtype=np.float64, sep=sep.decode())
    except ValueError:
        values = None
    if values is not None and values.size == n * ncols:
        return values.reshape(n, ncols), np.ones(n, dtype=bool)
    if n <= 8:
        return np.full((n, ncols), np.nan), np.zeros(n, dtype=bool)
    half = n // 2
    a, good_a = _convert(lines[:half], sep, ncols)
    b, good_b = _convert(lines[half:], sep, ncols)
    return np.vstack((a, b)), np.concatenate((good_a, good_b))


def _text(line: bytes) -> str | None:
    try:
        text = line.decode("ascii")
    except UnicodeDecodeError:
        return None
    return None if _CONTROL.search(text) else text


def _read_table_line(line: bytes, csv: bool, ncols: int) -> tuple[int, list[float] | None]:
    """One csv or whitespace line -> (LineStatus, values or None)."""
    text = _text(line)
    if text is None:
        return _GARBAGE, None
    tokens = [t.strip() for t in text.split(",")] if csv else text.split()
    numbers = [_number(t) for t in tokens]
    if all(x is None for x in numbers):
        return _GARBAGE, None
    if len(tokens) != ncols:
        return _FIELD_COUNT, None
    if any(x is None for x in numbers):
        return _BAD_NUMBER, None
    return _OK, numbers


def _read_pairs(bodies: list[bytes], status: np.ndarray, position: dict[str, int], out: np.ndarray,
                present: np.ndarray) -> None:
    """name=value lines: unknown names are skipped, absent ones stay NaN; a malformed or repeated pair, or a
    line with none of the known names, is FIELD_COUNT; a value that is not a number is BAD_NUMBER."""
    for i in np.flatnonzero(status == _OK).tolist():
        text = _text(bodies[i])
        tokens = [t for t in _PAIR_SPLIT.split(text) if t] if text is not None else []
        pairs = malformed = bad = 0
        for token in tokens:
            name, eq, value = token.partition("=")
            if not eq or not name:
                malformed += 1
                continue
            pairs += 1
            j = position.get(name)
            if j is None:
                continue
            if present[i, j]:
                malformed += 1
            x = _number(value)
            if x is None:
                bad += 1
            else:
                out[i, j] = x
                present[i, j] = True
        if pairs == 0:
            status[i] = _GARBAGE
        elif malformed or not (present[i].any() or bad):
            status[i] = _FIELD_COUNT
        elif bad:
            status[i] = _BAD_NUMBER


def word_lines(lines: list[bytes], layout: str) -> np.ndarray:
    """Indices of the lines holding any byte besides number characters and the layout's separators."""
    if not lines:
        return np.empty(0, dtype=np.int64)
    lengths = np.fromiter(map(len, lines), dtype=np.int64, count=len(lines))
    starts = np.concatenate(([0], np.cumsum(lengths + 1)[:-1]))
    odd = np.flatnonzero(_CLASSES[layout][np.frombuffer(b"\n".join(lines), dtype=np.uint8)] == 1)
    return np.unique(np.searchsorted(starts, odd, side="right") - 1)


def header_names(line: bytes, fmt: LineFormat) -> tuple[str, ...] | None:
    """The column names a line spells if every field is a name and none a number (checksum checked), else None."""
    body = line
    if fmt.checksum == "xor8":
        star = line.rfind(b"*")
        if star < 0 or not _HEX2.fullmatch(line, star + 1):
            return None
        body = line[1 if line[:1] == b"$" else 0: star]
        if xor8(body) != int(line[star + 1:], 16):
            return None
    text = _text(body)
    if text is None or fmt.layout == "pairs":
        return None
    names = [t.strip() for t in text.split(",")] if fmt.layout == "csv" else text.split()
    if not names or not all(_valid_name(t) for t in names) or len(set(names)) != len(names):
        return None
    return tuple(names)
