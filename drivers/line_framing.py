"""Cutting a serial byte stream into lines, without I/O: LineSplitter, and the NMEA-style xor8 checksum."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from drivers.base import LineStatus
from drivers.line_format import LineFormat

__all__ = ["FramedLines", "LineSplitter", "xor8"]

_OK, _PARTIAL, _TOO_LONG = int(LineStatus.OK), int(LineStatus.PARTIAL), int(LineStatus.TOO_LONG)


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
