"""The rig file's [[channels]] tables, checked, as ChannelSpecs with SI scale and offset (docs/channels.md)."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from monitor.config import Rig, RigTable
from monitor.errors import ConfigError, PhysicsError
from monitor.physics import flow_units
from monitor.units import SI_UNITS, parse_pressure, parse_quantity

if TYPE_CHECKING:
    pass


from monitor.calibration.kinds import (
    _KIND_ORDER,
    _NAME,
    _NO_TARE,
    _NUMBER,
    _SPAN_X,
    KINDS,
    ROLES,
    Calibration,
    Current420,
    Identity,
    Linear,
    Polynomial,
    Ratiometric,
    Table,
)


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

    def __init__(self, rig: Rig, t: RigTable, reference: Any, gas_factor: float):
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
        raise ConfigError(key, shown, "a unit of one of: " + ", ".join(SI_UNITS) + " (or SLPM, SCCM, ...)", self.t.source)

    def affine(
        self, unit: str, kind: str, key: str, value: Any, level: bool = True, with_gas_factor: bool = True
    ) -> tuple[float, float]:
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
            raise ConfigError(
                key,
                None,
                f"this key, which {spec.name} needs: the reference condition of the "
                "standard volume (no default, vendors differ), one of " + ", ".join(flow_units.REFERENCE_CONDITIONS),
                self.t.source,
            )
        try:
            return float(
                flow_units.standard_flow_to_mass_flow_kg_s(1.0, unit, self.rig.gas, self.reference, self.rig.gas_model, factor)
            )
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


def _finite(t: RigTable, name: str, default: Any = ..., low: float = -math.inf) -> Any:
    value = t.number(name, default, low=low)
    if value is not None and not math.isfinite(value):
        raise ConfigError(t.key(name), value, "a finite number", t.source)
    return value


def _numbers(t: RigTable, name: str, minimum: int) -> tuple[float, ...]:
    value = t.raw(name)
    if (
        not isinstance(value, list)
        or len(value) < minimum
        or not all(isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) for v in value)
    ):
        raise ConfigError(t.key(name), value, f"an array of at least {minimum} finite numbers", t.source)
    return tuple(float(v) for v in value)


def _calibration(t: RigTable, units: _Units, kind: str, scale: float, offset: float) -> Calibration:
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
            raise ConfigError(t.key("high_fraction"), high_f, f"a fraction above low_fraction ({low_f:g}), at most 1", t.source)
        cal = Ratiometric(supply, low_f, high_f, in_unit("low"), in_unit("high"))
    if isinstance(cal, (Current420, Ratiometric)) and cal.low == cal.high:
        raise ConfigError(t.key("high"), t.data.get("high"), "a value different from low", t.source)
    t.finish()
    return cal


def _accuracy(t: RigTable, units: _Units, kind: str) -> Accuracy:
    acc = Accuracy(
        percent_of_reading=_finite(t, "percent_of_reading", 0.0, low=0.0),
        percent_of_full_scale=_finite(t, "percent_of_full_scale", 0.0, low=0.0),
        full_scale=units.span(t.raw("full_scale"), kind, t.key("full_scale")) if "full_scale" in t.data else 0.0,
        absolute=units.span(t.raw("absolute"), kind, t.key("absolute")) if "absolute" in t.data else 0.0,
        distribution=t.choice("distribution", ("rectangular", "normal"), "rectangular"),
    )
    if acc.percent_of_full_scale > 0.0 and acc.full_scale == 0.0:
        raise ConfigError(
            t.key("full_scale"),
            t.data.get("full_scale"),
            "the sensor's full scale (> 0) when percent_of_full_scale is given",
            t.source,
        )
    t.finish()
    return acc


def _channel(rig: Rig, index: int, data: Any) -> ChannelSpec:
    t = RigTable(data, f"channels[{index}]", rig.source_path)
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
        raise ConfigError(
            t.key("gas_correction_factor"),
            factor,
            "no such key for a channel whose unit is not a standard-flow unit such as SLPM",
            src,
        )
    display = t.raw("display_unit", unit)
    if units.kind_of(display, t.key("display_unit")) != kind:
        raise ConfigError(t.key("display_unit"), display, f"a unit of {kind}, like unit", src)
    d_scale, d_offset = units.affine(display, kind, t.key("display_unit"), display, with_gas_factor=False)
    calibration = _calibration(RigTable(t.raw("calibration"), t.key("calibration"), src), units, kind, scale, offset)
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
        accuracy = _accuracy(RigTable(accuracy, t.key("accuracy"), src), units, kind)
    tare = t.raw("tare", None)
    samples = 0
    if tare is not None:
        tt = RigTable(tare, t.key("tare"), src)
        samples = tt.raw("samples")
        if isinstance(samples, bool) or not isinstance(samples, int) or samples < 1:
            raise ConfigError(tt.key("samples"), samples, "a whole number of samples, 1 or more", src)
        if kind in _NO_TARE:
            raise ConfigError(t.key("tare"), tare, f"no tare on a {kind} channel (it must stay absolute)", src)
        tt.finish()
    if units.reference is not None and not units.flow_seen:
        raise ConfigError(
            t.key("flow_reference"), units.reference, "no such key on a channel that uses no standard-flow unit such as SLPM", src
        )
    spec = ChannelSpec(
        name=name,
        role=role,
        field=field_name,
        quantity=kind,
        unit=unit,
        display_unit=display,
        calibration=calibration,
        si_scale=scale,
        si_offset=offset,
        valid_range_si=valid_si,
        accuracy=accuracy,
        stale_after_s=t.quantity("stale_after", "time", "1 s"),
        tare_samples=samples,
        flow=flow,
        display_scale=d_scale,
        display_offset=d_offset,
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
                raise ConfigError(
                    f"channels[{index}].name",
                    spec.name,
                    f"a name not used before (channels[{other_index}] has it)",
                    rig.source_path,
                )
            if spec.role is not None and other.role == spec.role:
                raise ConfigError(
                    f"channels[{index}].role",
                    spec.role,
                    f"a role not used before (channels[{other_index}] has it)",
                    rig.source_path,
                )
        specs.append(spec)
    if fields is not None:
        _columns(tuple(specs), tuple(fields), rig.source_path)
    return tuple(specs)


def _columns(specs: tuple[ChannelSpec, ...], fields: tuple[str, ...], source: str | None = None) -> np.ndarray:
    for index, spec in enumerate(specs):
        if spec.field not in fields:
            raise ConfigError(
                f"channels[{index}].field", spec.field, "one of the source's fields: " + (", ".join(fields) or "(none)"), source
            )
    return np.array([fields.index(s.field) for s in specs], dtype=np.intp)
