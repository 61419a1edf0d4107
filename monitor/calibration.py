"""Sensor channels: the rig file's [[channels]] tables, and the vectorised raw -> SI calibration of a batch.

A channel takes one driver field, maps each raw number to a value in the channel's `unit` (calibration),
then to SI by an affine map value_si = value * si_scale + si_offset. Every unit change ejecta makes here is
affine (bar gauge -> Pa absolute adds the rig's ambient pressure, C -> K adds 273.15, a standard-flow unit
-> kg/s multiplies by the reference density), and scale and offset come from pint through monitor.units,
or from monitor.physics.flow_units for standard-flow units. The format is documented in docs/channels.md.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, ClassVar, Protocol

import numpy as np

from monitor.config import Rig, _Table
from monitor.errors import ConfigError, PhysicsError
from monitor.physics import flow_units
from monitor.physics.uncertainty import sensor_std_uncertainty
from monitor.samples import Batch, Quality
from monitor.units import SI_UNITS, parse_pressure, parse_quantity

if TYPE_CHECKING:
    from drivers.base import RawBatch

# What the engine uses a channel for, and the kind of quantity that role must carry.
ROLES: dict[str, str] = {
    "tank_pressure": "pressure", "tank_temperature": "temperature", "feed_pressure": "pressure",
    "feed_temperature": "temperature", "mass_flow": "mass_flow", "thrust": "force", "valve": "dimensionless",
}
# IEC 60381-1 live-zero current signal: 4 mA is the lower range value, 20 mA the upper, linear between.
LOOP_LOW_MA, LOOP_HIGH_MA = 4.0, 20.0
# NAMUR NE 43 measuring band (common practice): a loop current below 3.8 mA or above 20.5 mA is a fault.
NAMUR_LOW_MA, NAMUR_HIGH_MA = 3.8, 20.5
_NAME = re.compile(r"^[a-z][a-z0-9_]*$")
_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
# Kinds tried, in order, to find what a unit measures; angle before dimensionless, since pint's radian is
# dimensionless ("deg" is an angle, "1" and "percent" are plain numbers).
_KIND_ORDER = ("pressure", "temperature", "mass_flow", "force", "mass", "length", "area", "volume", "time",
               "velocity", "acceleration", "impulse", "energy", "angle", "dimensionless")
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


@dataclass(frozen=True)
class Accuracy:
    """Datasheet accuracy +/-(% of reading + % of full scale + absolute); spans in SI."""

    percent_of_reading: float = 0.0
    percent_of_full_scale: float = 0.0
    full_scale: float = 0.0  # SI unit of the channel's quantity, a span
    absolute: float = 0.0  # SI unit of the channel's quantity, a span
    distribution: str = "rectangular"  # "rectangular" (bare limits) or "normal" (a k = 2 figure)


@dataclass(frozen=True)
class StandardFlow:
    """How a standard- or normal-flow reading becomes kg/s (monitor.physics.flow_units)."""

    unit: str  # canonical flow unit, e.g. "SLPM"
    reference: flow_units.ReferenceCondition
    gas: str
    gas_model: str
    gas_correction_factor: float
    kg_s_per_unit: float  # includes the gas correction factor


@dataclass(frozen=True)
class ChannelSpec:
    """One checked [[channels]] table. value_si = calibration(raw) * si_scale + si_offset."""

    name: str
    role: str | None
    field: str
    quantity: str  # a key of monitor.units.SI_UNITS
    unit: str
    display_unit: str
    calibration: Calibration
    si_scale: float
    si_offset: float  # e.g. ambient pressure for a gauge unit, 273.15 for C
    valid_range_si: tuple[float, float]
    accuracy: Accuracy | None
    stale_after_s: float
    tare_samples: int = 0  # 0: no tare
    flow: StandardFlow | None = None
    display_scale: float = 1.0
    display_offset: float = 0.0

    def to_display(self, values_si: np.ndarray) -> np.ndarray:
        """SI values (after tare) expressed in display_unit."""
        return (np.asarray(values_si, dtype=float) - self.display_offset) / self.display_scale


class _Units:
    """Affine unit maps for one channel, through monitor.units (pint) and monitor.physics.flow_units."""

    def __init__(self, rig: Rig, t: _Table, reference: Any, gas_factor: float):
        self.rig, self.t, self.reference, self.gas_factor = rig, t, reference, gas_factor
        self.flow_seen = False
        self.unit = ""  # the channel's unit, once read

    def split(self, value: Any, key: str) -> tuple[float, str]:
        if isinstance(value, (int, float)) and not isinstance(value, bool):
            return float(value), ""
        match = _NUMBER.match(value) if isinstance(value, str) else None
        if not match:
            raise ConfigError(key, value, "a number and its unit, such as '300 bar gauge'", self.t.source)
        return float(match.group(1)), match.group(2)

    def kind_of(self, unit: Any, key: str, shown: Any = None) -> str:
        """The SI_UNITS kind a unit measures ("mass_flow" for SLPM and the like); shown: value for errors."""
        shown = unit if shown is None else shown
        if not isinstance(unit, str):
            raise ConfigError(key, unit, "a unit as a string, such as 'bar gauge', 'C', 'N' or 'SLPM'", self.t.source)
        try:
            flow_units.flow_unit(unit)
            return "mass_flow"
        except PhysicsError:
            pass
        trial = unit.rsplit(None, 1)[0] if len(unit.split()) > 1 else unit
        for kind in _KIND_ORDER:
            for text in (unit, trial) if kind == "pressure" else (unit,):
                try:
                    parse_quantity(f"1 {text}", kind, key)
                    return kind
                except ConfigError:
                    continue
        raise ConfigError(key, shown, "a unit of one of: " + ", ".join(SI_UNITS) + " (or SLPM, SCCM, ...)",
                          self.t.source)

    def affine(self, unit: str, kind: str, key: str, value: Any, level: bool = True,
               with_gas_factor: bool = True) -> tuple[float, float]:
        """(scale, offset) with SI = number * scale + offset; a span (level=False) needs no gauge/abs."""
        src = self.t.source
        if kind == "mass_flow" and self._is_flow(unit):
            factor = self.gas_factor if with_gas_factor else 1.0
            return self._flow_scale(unit, factor), 0.0
        if self.kind_of(unit, key, value) != kind:
            raise ConfigError(key, value, f"a {kind}, as the channel's unit is", src)
        ambient = self.rig.ambient_pressure_pa

        def at(x: float) -> float:
            if kind == "pressure":
                return parse_pressure(f"{x!r} {unit}", key, ambient, src)
            return parse_quantity(f"{x!r} {unit}", kind, key, src)

        try:
            try:
                zero = at(0.0)
                return (at(_SPAN_X) - zero) / _SPAN_X, zero
            except ConfigError:
                if kind == "pressure" and not level:  # a span such as "400 bar" needs no gauge or abs
                    return parse_quantity(f"{_SPAN_X!r} {unit}", kind, key, src) / _SPAN_X, 0.0
                raise
        except ConfigError as exc:
            raise ConfigError(key, value, exc.expected, src) from exc

    def _is_flow(self, unit: str) -> bool:
        try:
            flow_units.flow_unit(unit)
        except PhysicsError:
            return False
        self.flow_seen = True
        return True

    def _flow_scale(self, unit: str, factor: float) -> float:
        key = self.t.key("flow_reference")
        spec = flow_units.flow_unit(unit)
        if self.reference is None and not spec.normal:
            raise ConfigError(key, None, f"this key, which {spec.name} needs: the reference condition of the "
                              "standard volume (no default, vendors differ), one of "
                              + ", ".join(flow_units.REFERENCE_CONDITIONS), self.t.source)
        try:
            return float(flow_units.standard_flow_to_mass_flow_kg_s(
                1.0, unit, self.rig.gas, self.reference, self.rig.gas_model, factor))
        except PhysicsError as exc:
            raise ConfigError(key, self.reference, str(exc), self.t.source) from exc

    def level(self, value: Any, kind: str, key: str, with_gas_factor: bool = True) -> float:
        number, unit = self.split(value, key)
        if not unit and kind != "dimensionless":
            raise ConfigError(key, value, f"a {kind} with its unit, as a string", self.t.source)
        scale, offset = self.affine(unit, kind, key, value, True, with_gas_factor)
        level_si = number * scale + offset
        if kind in ("pressure", "temperature") and level_si < 0.0:
            raise ConfigError(key, value, f"an absolute {kind} of zero or more", self.t.source)
        return level_si

    def span(self, value: Any, kind: str, key: str) -> float:
        number, unit = self.split(value, key)
        if not unit and kind != "dimensionless":
            raise ConfigError(key, value, f"a {kind} span with its unit, as a string", self.t.source)
        span = number * self.affine(unit, kind, key, value, level=False)[0]
        if not (math.isfinite(span) and span >= 0.0):
            raise ConfigError(key, value, "a finite span of zero or more", self.t.source)
        return span


def _finite(t: _Table, name: str, default: Any = ..., low: float = -math.inf) -> Any:
    value = t.number(name, default, low=low)
    if value is not None and not math.isfinite(value):
        raise ConfigError(t.key(name), value, "a finite number", t.source)
    return value


def _numbers(t: _Table, name: str, minimum: int) -> tuple[float, ...]:
    value = t.raw(name)
    if (not isinstance(value, list) or len(value) < minimum
            or not all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in value)):
        raise ConfigError(t.key(name), value, f"an array of at least {minimum} finite numbers", t.source)
    return tuple(float(v) for v in value)


def _calibration(t: _Table, units: _Units, kind: str, scale: float, offset: float) -> Calibration:
    cal_kind = t.choice("kind", tuple(KINDS))

    def in_unit(name: str) -> float:  # a level given with a unit, in the channel's unit
        number, unit = units.split(t.raw(name), t.key(name))
        level_si = units.level(t.data[name], kind, t.key(name))  # checks unit and kind
        return number if unit == units.unit else (level_si - offset) / scale

    if cal_kind == "identity":
        cal: Calibration = Identity()
    elif cal_kind == "linear":
        cal = Linear(_finite(t, "gain"), _finite(t, "offset", 0.0))
        if cal.gain == 0.0:
            raise ConfigError(t.key("gain"), 0.0, "a non-zero gain", t.source)
    elif cal_kind == "polynomial":
        cal = Polynomial(_numbers(t, "coefficients", 2))
        if not any(cal.coefficients[1:]):
            raise ConfigError(t.key("coefficients"), list(cal.coefficients), "a non-constant polynomial", t.source)
    elif cal_kind == "table":
        raw, value = _numbers(t, "raw", 2), _numbers(t, "value", 2)
        if len(value) != len(raw):
            raise ConfigError(t.key("value"), list(value), f"{len(raw)} numbers, one per raw point", t.source)
        if any(b <= a for a, b in zip(raw, raw[1:])):
            raise ConfigError(t.key("raw"), list(raw), "strictly increasing raw points", t.source)
        cal = Table(raw, value)
        if not np.all(np.isfinite(cal._points[2])):  # type: ignore[attr-defined]
            raise ConfigError(t.key("raw"), list(raw), "raw points far enough apart for finite slopes", t.source)
    elif cal_kind == "current_4_20":
        cal = Current420(in_unit("low"), in_unit("high"))
    else:
        supply = _finite(t, "supply_v", low=0.0)
        low_f, high_f = _finite(t, "low_fraction", 0.1, low=0.0), _finite(t, "high_fraction", 0.9, low=0.0)
        if supply == 0.0:
            raise ConfigError(t.key("supply_v"), supply, "a supply voltage above 0 (volts)", t.source)
        if not low_f < high_f <= 1.0:
            raise ConfigError(t.key("high_fraction"), high_f, f"a fraction above low_fraction ({low_f:g}), at most 1",
                              t.source)
        cal = Ratiometric(supply, low_f, high_f, in_unit("low"), in_unit("high"))
    if isinstance(cal, (Current420, Ratiometric)) and cal.low == cal.high:
        raise ConfigError(t.key("high"), t.data.get("high"), "a value different from low", t.source)
    t.finish()
    return cal


def _accuracy(t: _Table, units: _Units, kind: str) -> Accuracy:
    acc = Accuracy(
        percent_of_reading=_finite(t, "percent_of_reading", 0.0, low=0.0),
        percent_of_full_scale=_finite(t, "percent_of_full_scale", 0.0, low=0.0),
        full_scale=units.span(t.raw("full_scale"), kind, t.key("full_scale")) if "full_scale" in t.data else 0.0,
        absolute=units.span(t.raw("absolute"), kind, t.key("absolute")) if "absolute" in t.data else 0.0,
        distribution=t.choice("distribution", ("rectangular", "normal"), "rectangular"),
    )
    if acc.percent_of_full_scale > 0.0 and acc.full_scale == 0.0:
        raise ConfigError(t.key("full_scale"), t.data.get("full_scale"), "the sensor's full scale (> 0) when "
                          "percent_of_full_scale is given", t.source)
    t.finish()
    return acc


def _channel(rig: Rig, index: int, data: Any) -> ChannelSpec:
    t = _Table(data, f"channels[{index}]", rig.source_path)
    src = t.source
    name = t.raw("name")
    if not isinstance(name, str) or not _NAME.match(name):
        raise ConfigError(t.key("name"), name, "a snake_case name such as 'tank_pressure'", src)
    role = t.raw("role", None)
    if role is not None and role not in ROLES:
        raise ConfigError(t.key("role"), role, "one of " + ", ".join(ROLES), src)
    field_name = t.raw("field")
    if not isinstance(field_name, str) or not field_name.strip():
        raise ConfigError(t.key("field"), field_name, "the name of a field the source provides", src)
    factor = _finite(t, "gas_correction_factor", None, low=0.0)
    if factor == 0.0:
        raise ConfigError(t.key("gas_correction_factor"), factor, "a factor above 0", src)
    units = _Units(rig, t, t.raw("flow_reference", None), 1.0 if factor is None else factor)
    unit = units.unit = t.raw("unit")
    kind = units.kind_of(unit, t.key("unit"))
    if role is not None and ROLES[role] != kind:
        raise ConfigError(t.key("unit"), unit, f"a unit of {ROLES[role]} for role {role!r}", src)
    scale, offset = units.affine(unit, kind, t.key("unit"), unit)
    flow = None
    if units.flow_seen:
        canonical = flow_units.flow_unit(unit).name
        ref = flow_units.reference_condition("0C" if units.reference is None else units.reference)
        flow = StandardFlow(canonical, ref, rig.gas, rig.gas_model, units.gas_factor, scale)
    elif factor is not None:
        raise ConfigError(t.key("gas_correction_factor"), factor, "no such key for a channel whose unit is not a "
                          "standard-flow unit such as SLPM", src)
    display = t.raw("display_unit", unit)
    if units.kind_of(display, t.key("display_unit")) != kind:
        raise ConfigError(t.key("display_unit"), display, f"a unit of {kind}, like unit", src)
    d_scale, d_offset = units.affine(display, kind, t.key("display_unit"), display, with_gas_factor=False)
    calibration = _calibration(_Table(t.raw("calibration"), t.key("calibration"), src), units, kind, scale, offset)
    valid = t.raw("valid_range", None)
    valid_si = (-math.inf, math.inf)
    if valid is not None:
        if not isinstance(valid, list) or len(valid) != 2:
            raise ConfigError(t.key("valid_range"), valid, "two values [low, high] with units", src)
        valid_si = tuple(units.level(v, kind, f"{t.key('valid_range')}[{i}]") for i, v in enumerate(valid))
        if not valid_si[0] < valid_si[1]:
            raise ConfigError(t.key("valid_range"), valid, "[low, high] with low below high", src)
    accuracy = t.raw("accuracy", None)
    if accuracy is not None:
        accuracy = _accuracy(_Table(accuracy, t.key("accuracy"), src), units, kind)
    tare = t.raw("tare", None)
    samples = 0
    if tare is not None:
        tt = _Table(tare, t.key("tare"), src)
        samples = tt.raw("samples")
        if isinstance(samples, bool) or not isinstance(samples, int) or samples < 1:
            raise ConfigError(tt.key("samples"), samples, "a whole number of samples, 1 or more", src)
        if kind in _NO_TARE:
            raise ConfigError(t.key("tare"), tare, f"no tare on a {kind} channel (it must stay absolute)", src)
        tt.finish()
    if units.reference is not None and not units.flow_seen:
        raise ConfigError(t.key("flow_reference"), units.reference, "no such key on a channel that uses no "
                          "standard-flow unit such as SLPM", src)
    spec = ChannelSpec(
        name=name, role=role, field=field_name, quantity=kind, unit=unit, display_unit=display,
        calibration=calibration, si_scale=scale, si_offset=offset, valid_range_si=valid_si, accuracy=accuracy,
        stale_after_s=t.quantity("stale_after", "time", "1 s"), tare_samples=samples, flow=flow,
        display_scale=d_scale, display_offset=d_offset,
    )
    t.finish()
    return spec


def parse_channels(rig: Rig, fields: tuple[str, ...] | None = None) -> tuple[ChannelSpec, ...]:
    """Check rig.channels and build one ChannelSpec per [[channels]] table, in file order.

    Args:
        rig: the loaded rig (its ambient pressure, gas and gas model are used).
        fields: the driver's field names; when given, every channel's field must be one of them.

    Raises:
        ConfigError: naming the key (e.g. "channels[2].calibration.low", counted from 0), the value and what
            was expected: unknown or missing keys, bad units, duplicate names, unknown or repeated roles.
    """
    specs: list[ChannelSpec] = []
    for index, data in enumerate(rig.channels):
        spec = _channel(rig, index, data)
        for other_index, other in enumerate(specs):
            if other.name == spec.name:
                raise ConfigError(f"channels[{index}].name", spec.name,
                                  f"a name not used before (channels[{other_index}] has it)", rig.source_path)
            if spec.role is not None and other.role == spec.role:
                raise ConfigError(f"channels[{index}].role", spec.role,
                                  f"a role not used before (channels[{other_index}] has it)", rig.source_path)
        specs.append(spec)
    if fields is not None:
        _columns(tuple(specs), tuple(fields), rig.source_path)
    return tuple(specs)


def _columns(specs: tuple[ChannelSpec, ...], fields: tuple[str, ...], source: str | None = None) -> np.ndarray:
    for index, spec in enumerate(specs):
        if spec.field not in fields:
            raise ConfigError(f"channels[{index}].field", spec.field,
                              "one of the source's fields: " + (", ".join(fields) or "(none)"), source)
    return np.array([fields.index(s.field) for s in specs], dtype=np.intp)


class Calibrator:
    """Turns the good rows of RawBatches into Batches of SI channel values with Quality flags.

    Per sample and channel: a NaN or inf field is NON_FINITE (MISSING instead where the caller's `missing`
    mask says the field was absent from its line); a raw value outside the calibration's range (4-20 mA
    beyond NAMUR NE 43, outside a table) or a calibrated value that is not finite is OUT_OF_RANGE, and so is
    a value outside valid_range. Any flagged sample is NaN in values.

    Tare (stateful): a channel with tare_samples = N subtracts the mean of its first N usable samples (finite
    and within the calibration's range) from every later sample. Until the N-th has arrived there is no zero
    to subtract, so the channel's otherwise good samples up to and including it are flagged MISSING (NaN):
    an untared thrust must not reach the impulse integral. reset_tare starts the count again.
    """

    def __init__(self, specs: tuple[ChannelSpec, ...], fields: tuple[str, ...]):
        """Build the calibrator with no tare measured yet.

        Args:
            specs: the channels, from parse_channels.
            fields: the driver's field names, in column order.

        Raises:
            ConfigError: a channel's field is not among fields, or two channels share a name.
        """
        self.specs = tuple(specs)
        names = [s.name for s in self.specs]
        for index, name in enumerate(names):
            if name in names[:index]:
                raise ConfigError(f"channels[{index}].name", name, "a name not used by another channel")
        self.fields = tuple(fields)
        self._columns = {self.fields: _columns(self.specs, self.fields)}
        self._tare_sum = {s.name: 0.0 for s in self.specs}
        self._tare_count = {s.name: 0 for s in self.specs}
        self._tare_offset: dict[str, float | None] = {s.name: None for s in self.specs}

    @property
    def channels(self) -> tuple[str, ...]:
        return tuple(s.name for s in self.specs)

    def tare_offset_si(self, name: str) -> float | None:
        """The zero subtracted from channel `name`, SI unit, or None while it is still being measured."""
        return self._tare_offset[name]

    def reset_tare(self, name: str | None = None) -> None:
        """Measure the zero of one channel (or of all, with None) again from the next good samples."""
        for n in self.channels if name is None else (name,):
            self._tare_sum[n], self._tare_count[n], self._tare_offset[n] = 0.0, 0, None

    def apply(self, raw: RawBatch, missing: np.ndarray | None = None) -> Batch:
        """Calibrate the rows of raw whose status is OK, one numpy pass per channel.

        Args:
            raw: a driver's batch; its fields may differ from the constructor's (a header read later).
            missing: optional (lines, fields) bool array, True where a field was absent from its line.

        Returns:
            Batch with one sample per good row: t_s, values (SI, NaN where flagged), quality (uint8),
            device_time_s and sequence of those rows.

        Raises:
            ConfigError: raw has good rows and lacks a field a channel needs.
        """
        ok = raw.ok
        t_s = np.asarray(raw.t_s)[ok]
        device = None if raw.device_time_s is None else np.asarray(raw.device_time_s)[ok]
        sequence = None if raw.sequence is None else np.asarray(raw.sequence)[ok]
        if t_s.size == 0:
            empty = Batch.empty(self.channels)
            return Batch(t_s=t_s, values=empty.values, quality=empty.quality, device_time_s=device, sequence=sequence)
        fields = tuple(raw.fields)
        if fields not in self._columns:
            self._columns[fields] = _columns(self.specs, fields)
        columns = self._columns[fields]
        block = np.asarray(raw.values, dtype=float)[ok][:, columns]
        absent = None if missing is None else np.asarray(missing, dtype=bool)[ok][:, columns]
        values: dict[str, np.ndarray] = {}
        quality: dict[str, np.ndarray] = {}
        for k, spec in enumerate(self.specs):
            values[spec.name], quality[spec.name] = self._channel(
                spec, block[:, k], None if absent is None else absent[:, k])
        return Batch(t_s=t_s, values=values, quality=quality, device_time_s=device, sequence=sequence)

    def _channel(self, spec: ChannelSpec, raw: np.ndarray, absent: np.ndarray | None):
        with np.errstate(all="ignore"):
            finite = np.isfinite(raw)
            value, outside = spec.calibration.apply(raw)
            si = value * spec.si_scale + spec.si_offset
        flags = np.zeros(raw.shape, dtype=np.uint8)
        if absent is None:
            flags[~finite] = Quality.NON_FINITE
        else:
            flags[~finite & absent] = Quality.MISSING
            flags[~finite & ~absent] = Quality.NON_FINITE
        usable = finite & ~outside & np.isfinite(si)
        flags[finite & ~usable] |= np.uint8(Quality.OUT_OF_RANGE)
        if spec.tare_samples:
            si, taring = self._tare(spec, si, usable)
            flags[taring & (flags == 0)] = Quality.MISSING
        low, high = spec.valid_range_si
        flags[usable & ((si < low) | (si > high))] |= np.uint8(Quality.OUT_OF_RANGE)
        return np.where(flags == 0, si, np.nan), flags

    def _tare(self, spec: ChannelSpec, si: np.ndarray, usable: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        name, taring = spec.name, np.zeros(si.shape, dtype=bool)
        if self._tare_offset[name] is None:
            take = np.flatnonzero(usable)[: spec.tare_samples - self._tare_count[name]]
            self._tare_sum[name] += float(si[take].sum())
            self._tare_count[name] += int(take.size)
            if self._tare_count[name] < spec.tare_samples:
                taring[:] = True
                return si, taring
            self._tare_offset[name] = self._tare_sum[name] / spec.tare_samples
            taring[: take[-1] + 1] = True
        return si - self._tare_offset[name], taring


def std_uncertainty(spec: ChannelSpec, values_si: np.ndarray) -> np.ndarray:
    """Per-sample standard uncertainty of a channel's SI values from its datasheet accuracy.

    Uses monitor.physics.uncertainty.sensor_std_uncertainty (GUM 4.3.7 rectangular, or 4.3.3 normal k = 2).
    "% of reading" is taken of the reading in the sensor's own frame, values_si - si_offset: a gauge
    sensor's gauge pressure, a Celsius sensor's Celsius temperature (in SI-sized units).

    Args:
        spec: the channel.
        values_si: calibrated values, SI unit of spec.quantity; NaN samples (flagged bad) give NaN.

    Returns:
        Standard uncertainty u (k = 1), SI unit of spec.quantity, same shape as values_si.

    Raises:
        PhysicsError: the channel's table has no accuracy.
    """
    if spec.accuracy is None:
        raise PhysicsError(f"channel {spec.name!r}: accuracy = None: expected an accuracy table in its "
                           "[[channels]] entry to give an uncertainty")
    values = np.asarray(values_si, dtype=float)
    out = np.full(values.shape, np.nan)
    good = np.isfinite(values)
    a = spec.accuracy
    out[good] = sensor_std_uncertainty(values[good] - spec.si_offset, a.percent_of_reading, a.percent_of_full_scale,
                                       a.full_scale, a.absolute, a.distribution)  # type: ignore[arg-type]
    return out
