"""The run-log format, version 1 (docs/run-log.md): constants, the escape rule, channel columns, the header.

In short: an ASCII file of '#' header lines (magic and version, header line count, software version, start time,
channels, the rig file line by line), then one CSV column row and one CSV row per received line or note. Text
that could hold anything (raw lines, rig lines, note texts) is written with one escape rule (escape_bytes), so
the file is pure ASCII, no header line holds a double quote, and every byte round-trips.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from drivers.base import LineStatus
from monitor import __version__
from monitor.errors import ConfigError, LogFormatError
from monitor.units import SI_UNITS

FORMAT_NAME = "ejecta-run-log"
FORMAT_VERSION = 1
FIXED_LEFT = ("kind", "t_s", "device_t_s", "seq")
FIXED_RIGHT = ("status", "raw")
LINE_KINDS = ("s", "b")  # a good line (sample) and a bad line; every other letter is a note
# SI unit symbol and column-name suffix of each kind of quantity in monitor.units.SI_UNITS.
SI_COLUMNS: dict[str, tuple[str, str]] = {
    "pressure": ("Pa", "pa"),
    "temperature": ("K", "k"),
    "length": ("m", "m"),
    "area": ("m^2", "m2"),
    "volume": ("m^3", "m3"),
    "mass": ("kg", "kg"),
    "force": ("N", "n"),
    "time": ("s", "s"),
    "velocity": ("m/s", "m_s"),
    "acceleration": ("m/s^2", "m_s2"),
    "mass_flow": ("kg/s", "kg_s"),
    "angle": ("rad", "rad"),
    "impulse": ("N*s", "n_s"),
    "energy": ("J", "j"),
    "dimensionless": ("1", ""),
}
_SAFE = bytes(b for b in range(0x20, 0x7F) if b not in b'"\\')
_ESCAPED = re.compile(r"(?:[ !#-\[\]-~]|\\[\\tnr]|\\x[0-9a-fA-F]{2})*")
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
        return FIXED_LEFT + tuple(c.column for c in self.channels) + tuple(c.quality_column for c in self.channels) + FIXED_RIGHT

    def render(self) -> str:
        """The header lines and the column row, ending with a newline."""

        def esc(text: str) -> str:
            return escape_bytes(text.encode("utf-8", "surrogateescape"))

        started = "unknown" if self.started_utc is None else _utc_text(self.started_utc)
        body = [
            f"software: {esc(self.software)}",
            f"started-utc: {started}",
            f"started-t-s: {float(self.started_t_s)!r}",
            f"rig-source: {esc(self.rig_source)}",
        ]
        body += [f"channel: {c.column} {c.name} {c.quantity} {c.unit}" for c in self.channels]
        body += [f"{key}: {esc(value)}" for key, value in self.extra]
        body += [f"rig: {esc(line)}" for line in self.rig_text.split("\n")]
        lines = [f"{FORMAT_NAME} {FORMAT_VERSION}", f"header-lines: {len(body) + 3}", *body, "end-header"]
        return "".join(f"# {line}\n" for line in lines) + ",".join(self.columns) + "\n"


def _utc_text(when: datetime) -> str:
    if when.tzinfo is None:
        raise ConfigError("started_utc", when, "a timezone-aware datetime")
    return when.astimezone(timezone.utc).isoformat(timespec="microseconds").replace("+00:00", "Z")


_KNOWN_KEYS = {
    "header-lines",
    "software",
    "started-utc",
    "started-t-s",
    "rig-source",
    "channel",
    "rig",
    "end-header",
    FORMAT_NAME,
}


def _read_header(f, path: Path) -> tuple[RunLogHeader, int]:
    def damaged(number: int, what: str) -> LogFormatError:
        return LogFormatError(f"{path}, line {number}: damaged run log header: {what}")

    first = f.readline(256)
    magic = f"# {FORMAT_NAME} ".encode()
    if not first.startswith(magic):
        raise LogFormatError(
            f"{path}, line 1: not an ejecta run log (expected it to start with {magic.decode().strip()!r}, found {first[:40]!r})"
        )
    version_text = first[len(magic) :].strip()
    if not version_text.isdigit():
        raise damaged(1, f"format version {version_text!r} is not a whole number")
    if int(version_text) > FORMAT_VERSION:
        raise LogFormatError(
            f"{path}, line 1: run log format {int(version_text)} was written by a newer "
            f"ejecta; this ejecta ({__version__}) reads format {FORMAT_VERSION} and older"
        )
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
    header = RunLogHeader(
        values["software"],
        started,
        started_t_s,
        "\n".join(rig),
        values.get("rig-source", ""),
        tuple(channels),
        tuple(extra),
        int(version_text),
    )
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
        raise ValueError(f"channel line {value!r}: expected {column.column} {column.name} {column.quantity} {column.unit}")
    return column
