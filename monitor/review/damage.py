"""Damaged run logs: find the first row the reader rejects, so the review can cover the rows before it."""

from __future__ import annotations

import dataclasses
import shutil
from pathlib import Path

from monitor.errors import LogFormatError
from monitor.recorder import RunLog

CHUNK_ROWS = 65_536


@dataclasses.dataclass(frozen=True)
class Damage:
    """The first bad row of a log: its 1-based line number, its byte offset and the reader's complaint."""

    line: int
    offset: int
    good_rows: int
    message: str


def find_damage(log: RunLog) -> Damage | None:
    """The first body row that does not parse, or None when every complete row is good.

    Reads the body in chunks (pandas) to find the failing chunk, then bisects inside it.
    """
    good = 0
    try:
        for chunk in log.table(chunk_rows=CHUNK_ROWS):
            good += len(chunk)
        return None
    except LogFormatError as exc:
        message = str(exc)
    offsets = _row_offsets(log, good, CHUNK_ROWS + 1)  # start offsets of rows good, good+1, ... (+ the end)
    lo, hi = 0, len(offsets) - 1  # rows good..good+lo-1 parse; good..good+hi-1 may not
    while lo < hi:
        mid = (lo + hi + 1) // 2
        if _parses(log, offsets[0], offsets[mid]):
            lo = mid
        else:
            hi = mid - 1
    bad = good + lo
    return Damage(line=log.header_lines + 2 + bad, offset=offsets[lo], good_rows=bad, message=message)


def _parses(log: RunLog, start: int, end: int) -> bool:
    try:
        dataclasses.replace(log, data_start=start, data_end=end).table()
        return True
    except LogFormatError:
        return False


def _row_offsets(log: RunLog, first_row: int, count: int) -> list[int]:
    """Byte offsets where body rows first_row .. first_row + count - 1 start (stopping at the end of data)."""
    offsets: list[int] = []
    position, row = log.data_start, 0
    with open(log.path, "rb") as f:
        f.seek(position)
        while position < log.data_end and len(offsets) < count:
            if row >= first_row:
                offsets.append(position)
            line = f.readline()
            if not line:
                break
            position += len(line)
            row += 1
    if position >= log.data_end and len(offsets) < count:
        offsets.append(min(position, log.data_end))
    return offsets


def copy_before(path: Path, offset: int, target: Path) -> None:
    """Copy the first `offset` bytes of path (the header and the good rows) to target."""
    with open(path, "rb") as src, open(target, "wb") as dst:
        left = offset
        while left > 0:
            block = src.read(min(left, 1 << 22))
            if not block:
                break
            dst.write(block)
            left -= len(block)
    shutil.copystat(path, target)
