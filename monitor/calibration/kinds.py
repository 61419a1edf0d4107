"""Calibration kinds: vectorised maps from a driver's raw numbers to a value in the channel's unit."""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import TYPE_CHECKING, ClassVar, Protocol

import numpy as np

if TYPE_CHECKING:
    pass

# What the engine uses a channel for, and the kind of quantity that role must carry.
ROLES: dict[str, str] = {
    "tank_pressure": "pressure",
    "tank_temperature": "temperature",
    "feed_pressure": "pressure",
    "feed_temperature": "temperature",
    "mass_flow": "mass_flow",
    "thrust": "force",
    "valve": "dimensionless",
}
# IEC 60381-1 live-zero current signal: 4 mA is the lower range value, 20 mA the upper, linear between.
LOOP_LOW_MA, LOOP_HIGH_MA = 4.0, 20.0
# NAMUR NE 43 measuring band (common practice): a loop current below 3.8 mA or above 20.5 mA is a fault.
NAMUR_LOW_MA, NAMUR_HIGH_MA = 3.8, 20.5
_NAME = re.compile(r"^[a-z][a-z0-9_]*$")
_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
# Kinds tried, in order, to find what a unit measures; angle before dimensionless, since pint's radian is
# dimensionless ("deg" is an angle, "1" and "percent" are plain numbers).
_KIND_ORDER = (
    "pressure",
    "temperature",
    "mass_flow",
    "force",
    "mass",
    "length",
    "area",
    "volume",
    "time",
    "velocity",
    "acceleration",
    "impulse",
    "energy",
    "angle",
    "dimensionless",
)
_NO_TARE = ("pressure", "temperature")  # quantities that must stay absolute downstream
_SPAN_X = 1.0e6  # scale = (f(X) - f(0)) / X from two far-apart points keeps rounding near 1e-16


class Calibration(Protocol):
    """A frozen raw -> value map: apply(raw) gives (value in the channel's unit, out-of-range mask)."""

    kind: ClassVar[str]

    def apply(self, raw: np.ndarray) -> tuple[np.ndarray, np.ndarray]: ...


@dataclass(frozen=True)
class Identity:
    """value = raw (e.g. a thermocouple amplifier that sends degrees C)."""

    kind: ClassVar[str] = "identity"

    def apply(self, raw: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Returns (raw itself, all-False out-of-range mask); raw in the channel's unit."""
        raw = np.asarray(raw, dtype=float)
        return raw, np.zeros(raw.shape, dtype=bool)


@dataclass(frozen=True)
class Linear:
    """value = gain * raw + offset, in the channel's unit."""

    gain: float
    offset: float
    kind: ClassVar[str] = "linear"

    def apply(self, raw: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        raw = np.asarray(raw, dtype=float)
        return self.gain * raw + self.offset, np.zeros(raw.shape, dtype=bool)


@dataclass(frozen=True)
class Polynomial:
    """value = c0 + c1 raw + c2 raw^2 + ..., in the channel's unit (Horner's scheme)."""

    coefficients: tuple[float, ...]
    kind: ClassVar[str] = "polynomial"

    def apply(self, raw: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        raw = np.asarray(raw, dtype=float)
        return np.polynomial.polynomial.polyval(raw, self.coefficients), np.zeros(raw.shape, dtype=bool)


@dataclass(frozen=True)
class Table:
    """Piecewise-linear interpolation in (raw, value) points, raw strictly increasing; outside -> out of range."""

    raw: tuple[float, ...]
    value: tuple[float, ...]
    kind: ClassVar[str] = "table"

    def __post_init__(self) -> None:
        xp, fp = np.array(self.raw, dtype=float), np.array(self.value, dtype=float)
        with np.errstate(all="ignore"):  # points too close give an infinite slope; parse_channels refuses them
            slope = np.diff(fp) / np.diff(xp)
        object.__setattr__(self, "_points", (xp, fp, slope, np.minimum(fp[:-1], fp[1:]), np.maximum(fp[:-1], fp[1:])))

    def apply(self, raw: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Each value is clipped to its segment's end values, so rounding cannot break monotonicity."""
        raw = np.asarray(raw, dtype=float)
        xp, fp, slope, low, high = self._points  # type: ignore[attr-defined]
        j = np.clip(np.searchsorted(xp, raw, side="right") - 1, 0, xp.size - 2)
        value = np.clip(fp[j] + (raw - xp[j]) * slope[j], low[j], high[j])
        return value, (raw < xp[0]) | (raw > xp[-1])


@dataclass(frozen=True)
class Current420:
    """4-20 mA loop (IEC 60381-1): raw in mA, low at 4 mA, high at 20 mA; outside 3.8-20.5 mA out of range."""

    low: float  # channel unit
    high: float  # channel unit
    kind: ClassVar[str] = "current_4_20"

    def apply(self, raw: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        raw = np.asarray(raw, dtype=float)
        gain = (self.high - self.low) / (LOOP_HIGH_MA - LOOP_LOW_MA)
        return self.low + (raw - LOOP_LOW_MA) * gain, (raw < NAMUR_LOW_MA) | (raw > NAMUR_HIGH_MA)


@dataclass(frozen=True)
class Ratiometric:
    """Output proportional to supply: raw volts; low at low_fraction*supply, high at high_fraction*supply.

    A reading below 0 V or above the supply cannot come from a working ratiometric sensor: out of range.
    """

    supply_v: float
    low_fraction: float
    high_fraction: float
    low: float  # channel unit
    high: float  # channel unit
    kind: ClassVar[str] = "ratiometric"

    def apply(self, raw: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        raw = np.asarray(raw, dtype=float)
        span_v = (self.high_fraction - self.low_fraction) * self.supply_v
        gain = (self.high - self.low) / span_v
        return self.low + (raw - self.low_fraction * self.supply_v) * gain, (raw < 0.0) | (raw > self.supply_v)


KINDS = {c.kind: c for c in (Identity, Linear, Polynomial, Table, Current420, Ratiometric)}
