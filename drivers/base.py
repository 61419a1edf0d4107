"""What every driver produces (RawBatch) and the small interface every driver implements (Driver)."""

from __future__ import annotations

from abc import ABC, abstractmethod
from dataclasses import dataclass, field
from enum import IntEnum
from typing import TYPE_CHECKING

import numpy as np

from monitor.samples import LinkEvent

if TYPE_CHECKING:
    from monitor.clock import Clock
    from monitor.config import Rig


class LineStatus(IntEnum):
    """What became of one received line (or one poll of an instrument)."""

    OK = 0
    GARBAGE = 1  # not text, or no field could be read
    FIELD_COUNT = 2  # wrong number of fields
    BAD_NUMBER = 3  # a field that should be a number is not
    CHECKSUM = 4  # checksum field present and wrong
    PARTIAL = 5  # a line cut short (at the start of reading or when the link dropped)
    TOO_LONG = 6  # longer than the driver's line limit
    NO_RESPONSE = 7  # an instrument did not answer a poll (Modbus)


@dataclass
class RawBatch:
    """Everything a driver read in one call, one row per received line (good or bad).

    Attributes:
        t_s: receive time of each line on the source's monotonic clock, seconds, float64.
        lines: each line exactly as received, without its terminator.
        status: LineStatus per line, uint8.
        fields: names of the value fields, in column order.
        values: (lines, fields) float64; NaN where a field is missing, not finite, or the line is bad.
        device_time_s: the device's timestamp per line in seconds (NaN where absent), or None.
        sequence: the device's sequence number per line (-1 where absent), int64, or None.
        events: link events during this read (connected, lost, reconnecting, ...).
        missing: True where a good line lacks a field (e.g. a Modbus unit that did not answer in a poll the
            others answered), or None when every good line has every field. Such fields are NaN in values
            and calibrate to Quality.MISSING.
    """

    t_s: np.ndarray
    lines: list[bytes]
    status: np.ndarray
    fields: tuple[str, ...]
    values: np.ndarray
    device_time_s: np.ndarray | None = None
    sequence: np.ndarray | None = None
    events: list[LinkEvent] = field(default_factory=list)
    missing: np.ndarray | None = None  # (lines, fields) bool, True where a good line lacks a field; or None

    def __len__(self) -> int:
        return len(self.lines)

    @property
    def ok(self) -> np.ndarray:
        return self.status == LineStatus.OK

    @classmethod
    def empty(cls, fields: tuple[str, ...], events: list[LinkEvent] | None = None) -> "RawBatch":
        return cls(
            t_s=np.empty(0),
            lines=[],
            status=np.empty(0, dtype=np.uint8),
            fields=fields,
            values=np.empty((0, len(fields))),
            events=list(events or []),
        )


class Driver(ABC):
    """A source of raw readings. Use as a context manager; read() never blocks longer than its timeout.

    Subclasses implement _open, _read and _close; read() adds nothing but bookkeeping, so the same contract
    (never raise for bad data; report a lost link as an event and try to reconnect) holds for every driver.
    """

    fields: tuple[str, ...] = ()

    @classmethod
    @abstractmethod
    def from_rig(cls, rig: "Rig", clock: "Clock", port: str | None = None) -> "Driver":
        """Build the driver from the rig's [source] table; `port` (a device path or pyserial URL) overrides it.

        Raises:
            ConfigError: the [source] table is wrong for this driver (the message names the key).
        """

    def __enter__(self) -> "Driver":
        self.open()
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def open(self) -> None:
        self._open()

    def read(self, timeout_s: float = 0.05) -> RawBatch:
        """Lines received since the last call (possibly none), waiting at most timeout_s for the first."""
        return self._read(timeout_s)

    def close(self) -> None:
        self._close()

    @abstractmethod
    def _open(self) -> None: ...

    @abstractmethod
    def _read(self, timeout_s: float) -> RawBatch: ...

    @abstractmethod
    def _close(self) -> None: ...
