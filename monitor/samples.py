"""The data that flows from sources to estimators, recorder and screen: batches of columns, not objects per sample."""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntFlag
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from drivers.base import RawBatch


class Quality(IntFlag):
    """Per-sample quality of one channel; 0 means good. Bits combine."""

    GOOD = 0
    MISSING = 1  # the field was absent from the line, or the line was bad
    NON_FINITE = 2  # NaN or inf on the wire
    OUT_OF_RANGE = 4  # outside the sensor's valid range
    STALE = 8  # no fresh reading within the channel's stale timeout
    TARING = 16  # the channel is alive but still measuring its zero (tare): no usable value yet

    @staticmethod
    def alive(quality):
        """True where a sample shows its channel is delivering: good, or only taring (works on arrays)."""
        return (quality & ~Quality.TARING & 0xFF) == 0


@dataclass(frozen=True)
class Batch:
    """Calibrated samples of several channels on one time axis.

    Attributes:
        t_s: host receive time of each sample, seconds since the run started (monotonic clock), float64.
        values: channel name -> SI values, float64, NaN where the sample is not good.
        quality: channel name -> Quality bits, uint8.
        device_time_s: the device's own timestamp per sample, s, or None when the stream has none.
        sequence: the device's sequence number per sample, or None.
    """

    t_s: np.ndarray
    values: dict[str, np.ndarray]
    quality: dict[str, np.ndarray]
    device_time_s: np.ndarray | None = None
    sequence: np.ndarray | None = None

    def __len__(self) -> int:
        return int(self.t_s.size)

    @property
    def channels(self) -> tuple[str, ...]:
        return tuple(self.values)

    @classmethod
    def empty(cls, channels: tuple[str, ...] = ()) -> "Batch":
        return cls(
            t_s=np.empty(0),
            values={c: np.empty(0) for c in channels},
            quality={c: np.empty(0, dtype=np.uint8) for c in channels},
        )

    @classmethod
    def concat(cls, batches: list["Batch"]) -> "Batch":
        """Join batches with the same channels end to end."""
        if not batches:
            return cls.empty()
        names = batches[0].channels

        def cat(get):
            parts = [get(b) for b in batches]
            return None if any(p is None for p in parts) else np.concatenate(parts)

        return cls(
            t_s=np.concatenate([b.t_s for b in batches]),
            values={c: np.concatenate([b.values[c] for b in batches]) for c in names},
            quality={c: np.concatenate([b.quality[c] for b in batches]) for c in names},
            device_time_s=cat(lambda b: b.device_time_s),
            sequence=cat(lambda b: b.sequence),
        )


@dataclass(frozen=True)
class LinkEvent:
    """Something that happened to a data link, for the status line and the run log."""

    t_s: float  # seconds since the run started
    kind: str  # "connected", "lost", "reconnecting", "bad_line", "gap", "clock_backwards", ...
    detail: str = ""


@dataclass
class SourceReading:
    """What one read of a source produced: the driver's raw batch and the calibrated samples of its good lines.

    batch has one sample per line of raw whose status is LineStatus.OK, in the same order.
    """

    raw: "RawBatch"
    batch: Batch
