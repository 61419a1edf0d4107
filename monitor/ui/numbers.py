"""The big numbers (thrust, propellant, delta-v or hover endurance, time left) and the caution line, as strings.

Each value comes from the engine's EstimateState with its ± of two standard uncertainties (coverage factor
k = 2, about 95 % for a normal distribution; GUM, JCGM 100:2008, 6.2-6.3, from memory). The caution line's
stored energy is Brode's expression (monitor.physics.energy, Brode 1959) at the tank pressure last read.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from monitor.physics.energy import brode_energy_j, tnt_equivalent_kg
from monitor.physics.gas import ideal_gamma
from monitor.ui.display import DASH, DisplayUnits, Unit, decimals_for, number, plus_minus, shown
from monitor.ui.model import COVERAGE_K, Tile


def latest(values) -> float:
    """The newest finite value of an array (NaN if none)."""
    if values is None:
        return math.nan
    finite = np.flatnonzero(np.isfinite(values))
    return float(values[finite[-1]]) if finite.size else math.nan


@lru_cache(maxsize=8)
def _gamma(gas: str) -> float:
    return ideal_gamma(gas)


def caution_texts(rig, tank_pa: float, units: DisplayUnits) -> tuple[str, ...]:
    """The pressurised-system caution, longest form first: MEOP, tank pressure, stored energy (Brode)."""
    unit = units.pressure
    meop = shown(rig.tank.meop_pa, unit, 1)
    where = "now"
    if not math.isfinite(tank_pa):
        tank_pa, where = rig.tank.fill_pressure_pa, "at fill"
    energy_j = float(brode_energy_j(tank_pa, rig.ambient_pressure_pa, rig.tank.volume_m3, _gamma(rig.gas)))
    tnt_g = 1e3 * float(tnt_equivalent_kg(energy_j))
    kj = f"{energy_j / 1e3:.1f} kJ"
    tank = shown(tank_pa, unit, 1)
    return (
        f"CAUTION pressurised {rig.gas}: tank {tank} {where}, MEOP {meop} · stored {kj} ≈ {tnt_g:.1f} g TNT "
        "(Brode) · ejecta is a monitor, not an interlock: stay out of the line of fire",
        f"CAUTION MEOP {meop} · tank {tank} · stored {kj} ≈ {tnt_g:.1f} g TNT (Brode) · a monitor, not an interlock",
        f"CAUTION MEOP {meop} · tank {number(unit(tank_pa), 1)} · {kj} (Brode) · not an interlock",
        f"CAUTION MEOP {meop} · {kj} (Brode) · not an interlock",
    )


def _value(value_si: float, std_si: float, unit: Unit, decimals: int | None = None) -> tuple[str, str]:
    """(value, ±2σ) in a display unit, both with the value's decimals."""
    shown_value = unit(value_si)
    d = decimals_for(shown_value) if decimals is None else decimals
    return number(shown_value, d), plus_minus(COVERAGE_K * abs(std_si / unit.scale), d)


def _pm_line(pm: str, unit: str) -> str:
    """The line under a big number: its ±2σ and its unit (the unit is shown even when ± is not known)."""
    return f"{pm} {unit} (2σ)".replace("  ", " ") if pm else f"± {DASH} {unit}".rstrip()


def three_digits(value: float) -> str:
    """A value to three significant digits, no exponent (209, 20.9, 2.09): for the short gauge line."""
    if not math.isfinite(value) or value == 0.0:
        return number(value, 0)
    return number(value, max(0, 2 - math.floor(math.log10(abs(value)))))


def tiles(e, rig, units: DisplayUnits) -> tuple[Tile, ...]:
    """Thrust, propellant left, delta-v (stand) or hover endurance (platform) left, and time left.

    Detail lines are at most TILE_DETAIL_W characters, so that four tiles fit an 80-column screen.
    """
    force, mass, flow = units.by_kind["force"], units.by_kind["mass"], units.by_kind["mass_flow"]
    speed, time = units.by_kind["velocity"], units.by_kind["time"]
    out = []
    value, pm = _value(e.thrust_estimated_n, e.thrust_estimated_n_std, force)
    if "thrust" in units.roles:
        cell, cell_pm = _value(e.thrust_measured_n, e.thrust_measured_n_std, force)
        measured = f"cell {cell} {cell_pm}".rstrip()
    else:
        measured = "no load cell"
    valve = "FIRING" if e.firing else "shut"
    out.append(Tile("thrust", "THRUST (estimated)", value, force.symbol, _pm_line(pm, force.symbol),
                    (measured, f"{valve} · {e.pulse_count} pulse{'' if e.pulse_count == 1 else 's'}")))

    value, pm = _value(e.usable_propellant_percent, e.usable_propellant_percent_std, Unit("%"), 1)
    usable, usable_pm = _value(e.usable_propellant_kg, e.usable_propellant_kg_std, mass)
    gauges = (f"flow {three_digits(mass(e.propellant_flow_gauge_kg))} "
              f"pVT {three_digits(mass(e.propellant_pvt_gauge_kg))} {mass.symbol}")
    out.append(Tile("propellant", "USABLE PROPELLANT", value, "%", _pm_line(pm, "%"),
                    (f"{usable} {usable_pm} {mass.symbol}".replace("  ", " "), gauges)))

    if rig.kind == "hover_platform":
        value, pm = _value(e.hover_endurance_left_s, e.hover_endurance_left_s_std, time)
        dv, dv_pm = _value(e.delta_v_left_m_s, e.delta_v_left_m_s_std, speed)
        out.append(Tile("hover", "HOVER LEFT", value, time.symbol, _pm_line(pm, time.symbol),
                        (f"≥ {number(time(e.hover_endurance_left_conservative_s))} s (-2σ)",
                         f"Δv {dv} {dv_pm} m/s".replace("  ", " "))))
    else:
        value, pm = _value(e.delta_v_left_m_s, e.delta_v_left_m_s_std, speed)
        required = rig.vehicle.required_delta_v_m_s
        out.append(Tile("delta_v", "DELTA-V LEFT", value, speed.symbol, _pm_line(pm, speed.symbol),
                        (f"≥ {number(speed(e.delta_v_left_conservative_m_s))} m/s (-2σ)",
                         f"needed {number(required)} m/s" if required else f"dry {number(rig.vehicle.dry_mass_kg)} kg")))

    value, pm = _value(e.time_left_s, e.time_left_s_std, time)
    out.append(Tile("time_left", "TIME LEFT", value, time.symbol, _pm_line(pm, time.symbol),
                    (f"at {shown(e.mass_flow_filtered_kg_s, flow)}",
                     f"I {shown(e.total_impulse_n_s, units.by_kind['impulse'])}")))
    return tuple(out)
