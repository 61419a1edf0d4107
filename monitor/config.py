"""The rig file: a TOML description of one test setup, loaded into frozen dataclasses in SI units.

Every value that has a unit is written with it ("2 L", "300 bar gauge", "20 C"); loading checks every key
and reports each problem with the key, the value given and what was expected (ConfigError, exit code 2).
The format is documented in docs/rig-file.md.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

from monitor.errors import ConfigError, PhysicsError
from monitor.physics.gas import canonical_gas
from monitor.units import parse_pressure, parse_quantity

RIG_FORMAT_VERSION = 1
RigKind = Literal["stand", "hover_platform"]
ExpansionModel = Literal["isothermal", "isentropic", "polytropic"]

_SECTIONS = {
    "format",
    "rig",
    "tank",
    "regulator",
    "nozzle",
    "vehicle",
    "channels",
    "alerts",
    "source",
    "simulation",
    "estimation",
}


@dataclass(frozen=True)
class TankSpec:
    """The propellant bottle: volume, fill state, pressure limits and how it expands as it empties."""

    volume_m3: float
    fill_pressure_pa: float  # absolute
    fill_temperature_k: float
    meop_pa: float  # maximum expected operating pressure, absolute
    proof_pressure_pa: float | None  # absolute, if the rig file gives it
    expansion: ExpansionModel
    polytropic_exponent: float | None


@dataclass(frozen=True)
class RegulatorSpec:
    """Pressure regulator: the outlet set point and the lowest inlet pressure at which it still holds it."""

    set_pressure_pa: float  # absolute
    min_inlet_pressure_pa: float  # absolute


@dataclass(frozen=True)
class NozzleSpec:
    """One or more identical converging-diverging nozzles fed from the regulator."""

    throat_diameter_m: float
    exit_diameter_m: float
    discharge_coefficient: float
    divergence_half_angle_rad: float
    thrust_efficiency: float
    count: int

    @property
    def throat_area_m2(self) -> float:
        return math.pi * self.throat_diameter_m**2 / 4.0

    @property
    def exit_area_m2(self) -> float:
        return math.pi * self.exit_diameter_m**2 / 4.0


@dataclass(frozen=True)
class VehicleSpec:
    """The article or vehicle: its mass without propellant and what the mission needs of it."""

    dry_mass_kg: float  # everything but the propellant, tank included
    required_delta_v_m_s: float | None
    required_hover_time_s: float | None


@dataclass(frozen=True)
class Rig:
    """One test setup, in SI units, absolute pressures."""

    name: str
    kind: RigKind
    gas: str
    gas_model: Literal["real", "ideal"]
    ambient_pressure_pa: float
    ambient_temperature_k: float
    tank: TankSpec
    regulator: RegulatorSpec
    nozzle: NozzleSpec
    vehicle: VehicleSpec
    source_path: str | None = None
    text: str = ""  # the rig file as read, kept for the run log's header
    channels: tuple[dict[str, Any], ...] = field(default_factory=tuple)  # raw tables, checked by calibration
    alerts: tuple[dict[str, Any], ...] = field(default_factory=tuple)  # raw tables, checked by the alert engine
    source: dict[str, Any] = field(default_factory=dict)  # raw table, checked by the source factory
    simulation: dict[str, Any] = field(default_factory=dict)  # raw table, checked by the simulator
    estimation: dict[str, Any] = field(default_factory=dict)  # raw table, checked by monitor.estimators


class RigTable:
    """A TOML table being read: remembers which keys were used so unknown keys can be reported."""

    def __init__(self, data: Any, prefix: str, source: str | None):
        if not isinstance(data, dict):
            raise ConfigError(prefix, data, "a table", source)
        self.data, self.prefix, self.source, self.used = data, prefix, source, set()

    def key(self, name: str) -> str:
        return f"{self.prefix}.{name}" if self.prefix else name

    def raw(self, name: str, default: Any = ...) -> Any:
        self.used.add(name)
        if name not in self.data:
            if default is ...:
                raise ConfigError(self.key(name), None, "this key, which is required", self.source)
            return default
        return self.data[name]

    def quantity(self, name: str, kind: str, default: Any = ..., positive: bool = True) -> Any:
        value = self.raw(name, default)
        if value is None:
            return None
        number = parse_quantity(value, kind, self.key(name), self.source)
        if positive and number <= 0.0:
            raise ConfigError(self.key(name), value, f"a positive {kind}", self.source)
        return number

    def pressure(self, name: str, ambient_pa: float, default: Any = ...) -> Any:
        value = self.raw(name, default)
        if value is None:
            return None
        return parse_pressure(value, self.key(name), ambient_pa, self.source)

    def number(self, name: str, default: Any = ..., low: float = -math.inf, high: float = math.inf) -> Any:
        value = self.raw(name, default)
        if value is default and default is not ...:
            return value
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not (low <= value <= high):
            raise ConfigError(self.key(name), value, f"a number from {low:g} to {high:g}", self.source)
        return float(value)

    def choice(self, name: str, options: tuple[str, ...], default: Any = ...) -> Any:
        value = self.raw(name, default)
        if value not in options:
            raise ConfigError(self.key(name), value, "one of " + ", ".join(repr(o) for o in options), self.source)
        return value

    def fail(self, name: str, expected: str) -> ConfigError:
        """The error for key `name` of this table, with the value found there."""
        return ConfigError(self.key(name), self.data.get(name), expected, self.source)

    def finish(self) -> None:
        unknown = sorted(set(self.data) - self.used)
        if unknown:
            raise ConfigError(self.key(unknown[0]), self.data[unknown[0]], "no such key here (a typo?)", self.source)


def load_rig(path: str | Path) -> Rig:
    """Read and check a rig file.

    Raises:
        ConfigError: the file cannot be read, is not TOML, or any key is missing or wrong.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError("rig file", str(path), f"a readable UTF-8 TOML file ({exc.__class__.__name__}: {exc})") from exc
    return parse_rig(text, str(path))


def parse_rig(text: str, source: str | None = None) -> Rig:
    """Check a rig file's text and build the Rig; see load_rig."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError("rig file", source, f"valid TOML ({exc})", source) from exc
    top = RigTable(data, "", source)
    version = top.raw("format", RIG_FORMAT_VERSION)
    if version != RIG_FORMAT_VERSION:
        raise ConfigError("format", version, f"{RIG_FORMAT_VERSION} (the rig-file format this ejecta reads)", source)
    for name in data:
        if name not in _SECTIONS:
            raise ConfigError(name, data[name], "one of the sections " + ", ".join(sorted(_SECTIONS)), source)

    rig_t = RigTable(top.raw("rig"), "rig", source)
    ambient_pa = parse_pressure(rig_t.raw("ambient_pressure", "101.325 kPa abs"), "rig.ambient_pressure", 0.0, source)
    name = rig_t.raw("name")
    if not isinstance(name, str) or not name.strip():
        raise ConfigError("rig.name", name, "a non-empty string", source)
    kind = rig_t.choice("kind", ("stand", "hover_platform"))
    try:
        gas = canonical_gas(rig_t.raw("gas"))
    except PhysicsError as exc:
        raise ConfigError("rig.gas", rig_t.data.get("gas"), str(exc).split(": ", 1)[-1], source) from exc
    gas_model = rig_t.choice("gas_model", ("real", "ideal"), "real")
    ambient_t_k = rig_t.quantity("ambient_temperature", "temperature", "20 C")
    rig_t.finish()

    tank = _tank(RigTable(top.raw("tank"), "tank", source), ambient_pa)
    regulator = _regulator(RigTable(top.raw("regulator"), "regulator", source), ambient_pa, tank)
    nozzle = _nozzle(RigTable(top.raw("nozzle"), "nozzle", source))
    vehicle = _vehicle(RigTable(top.raw("vehicle"), "vehicle", source))
    if tank.fill_pressure_pa <= ambient_pa:
        raise ConfigError("tank.fill_pressure", tank.fill_pressure_pa, "a pressure above ambient", source)
    channels = top.raw("channels", [])
    alerts = top.raw("alerts", [])
    for key, tables in (("channels", channels), ("alerts", alerts)):
        if not isinstance(tables, list) or not all(isinstance(t, dict) for t in tables):
            raise ConfigError(key, tables, f"an array of tables ([[{key}]])", source)
    src = top.raw("source", {})
    if not isinstance(src, dict):
        raise ConfigError("source", src, "a table ([source])", source)
    simulation = top.raw("simulation", {})
    if not isinstance(simulation, dict):
        raise ConfigError("simulation", simulation, "a table ([simulation])", source)
    estimation = top.raw("estimation", {})
    if not isinstance(estimation, dict):
        raise ConfigError("estimation", estimation, "a table ([estimation])", source)
    return Rig(
        name=name.strip(),
        kind=kind,
        gas=gas,
        gas_model=gas_model,
        ambient_pressure_pa=ambient_pa,
        ambient_temperature_k=ambient_t_k,
        tank=tank,
        regulator=regulator,
        nozzle=nozzle,
        vehicle=vehicle,
        source_path=source,
        text=text,
        channels=tuple(channels),
        alerts=tuple(alerts),
        source=src,
        simulation=simulation,
        estimation=estimation,
    )


def _tank(t: RigTable, ambient_pa: float) -> TankSpec:
    spec = TankSpec(
        volume_m3=t.quantity("volume", "volume"),
        fill_pressure_pa=t.pressure("fill_pressure", ambient_pa),
        fill_temperature_k=t.quantity("fill_temperature", "temperature"),
        meop_pa=t.pressure("meop", ambient_pa),
        proof_pressure_pa=t.pressure("proof_pressure", ambient_pa, None),
        expansion=t.choice("expansion", ("isothermal", "isentropic", "polytropic"), "isentropic"),
        polytropic_exponent=t.number("polytropic_exponent", None, low=1.0, high=2.0),
    )
    if spec.expansion == "polytropic" and spec.polytropic_exponent is None:
        raise t.fail("polytropic_exponent", "an exponent n from 1 to 2 when expansion is 'polytropic'")
    if spec.fill_pressure_pa > spec.meop_pa:
        raise t.fail("fill_pressure", f"at most the MEOP ({t.data['meop']})")
    if spec.proof_pressure_pa is not None and spec.proof_pressure_pa < spec.meop_pa:
        raise t.fail("proof_pressure", "at least the MEOP")
    t.finish()
    return spec


def _regulator(t: RigTable, ambient_pa: float, tank: TankSpec) -> RegulatorSpec:
    spec = RegulatorSpec(
        set_pressure_pa=t.pressure("set_pressure", ambient_pa),
        min_inlet_pressure_pa=t.pressure("min_inlet_pressure", ambient_pa),
    )
    if spec.set_pressure_pa <= ambient_pa:
        raise t.fail("set_pressure", "a set point above ambient pressure")
    if spec.min_inlet_pressure_pa <= spec.set_pressure_pa:
        raise t.fail("min_inlet_pressure", "a pressure above the set point")
    if spec.min_inlet_pressure_pa >= tank.fill_pressure_pa:
        raise t.fail("min_inlet_pressure", "a pressure below the tank's fill pressure")
    t.finish()
    return spec


def _nozzle(t: RigTable) -> NozzleSpec:
    count = t.raw("count", 1)
    if isinstance(count, bool) or not isinstance(count, int) or count < 1:
        raise ConfigError(t.key("count"), count, "a whole number of nozzles, 1 or more", t.source)
    spec = NozzleSpec(
        throat_diameter_m=t.quantity("throat_diameter", "length"),
        exit_diameter_m=t.quantity("exit_diameter", "length"),
        discharge_coefficient=t.number("discharge_coefficient", 1.0, low=0.1, high=1.0),
        divergence_half_angle_rad=t.quantity("divergence_half_angle", "angle", "0 deg", positive=False),
        thrust_efficiency=t.number("thrust_efficiency", 1.0, low=0.1, high=1.0),
        count=count,
    )
    if spec.exit_diameter_m < spec.throat_diameter_m:
        raise t.fail("exit_diameter", "at least the throat diameter")
    if not 0.0 <= spec.divergence_half_angle_rad < math.radians(45.0):
        raise t.fail("divergence_half_angle", "an angle from 0 to 45 deg")
    t.finish()
    return spec


def _vehicle(t: RigTable) -> VehicleSpec:
    spec = VehicleSpec(
        dry_mass_kg=t.quantity("dry_mass", "mass"),
        required_delta_v_m_s=t.quantity("required_delta_v", "velocity", None),
        required_hover_time_s=t.quantity("required_hover_time", "time", None),
    )
    t.finish()
    return spec
