"""Framed serial lines into numbers, without I/O: parse_lines, and reading a header line of column names.

The numeric path works on whole batches with numpy: the candidate lines are joined into one buffer, checked
byte-wise (byte classes, separator counts, empty fields) and converted by one numpy call; only the lines that
fail a check go through the per-line reader, which decides their LineStatus. Nothing here raises on bad data.
"""

from __future__ import annotations

import re

import numpy as np

from drivers.base import LineStatus, RawBatch
from drivers.line_format import LineFormat, _number, _valid_name
from drivers.line_framing import xor8

__all__ = ["header_names", "parse_lines", "word_lines"]

_OK, _GARBAGE, _FIELD_COUNT = int(LineStatus.OK), int(LineStatus.GARBAGE), int(LineStatus.FIELD_COUNT)
_BAD_NUMBER, _CHECKSUM = int(LineStatus.BAD_NUMBER), int(LineStatus.CHECKSUM)

_CONTROL = re.compile(r"[\x00-\x08\x0a-\x1f\x7f]")
_HEX2 = re.compile(rb"[0-9A-Fa-f]{2}")
_PAIR_SPLIT = re.compile(r"[,\s]+")
_COMMA, _SPACE, _TAB = 0x2C, 0x20, 0x09
_NUMBER_CHARS = np.frombuffer(b"0123456789.+-eE", dtype=np.uint8)


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
