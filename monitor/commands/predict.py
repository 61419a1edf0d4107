"""Print what a rig will do when fired continuously from a full tank, as text or as JSON (SI units in the keys)."""

from __future__ import annotations

import argparse
import json
import math

from monitor import safety


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("rig", nargs="?", default=None, help="rig file, or a bundled demo rig's name (default: the bench demo)")
    parser.add_argument("--json", action="store_true", help="print one JSON object, SI units in the key names")


def run(args: argparse.Namespace) -> int:
    from monitor.config import load_rig
    from monitor.errors import ConfigError, PhysicsError
    from monitor.predict import predict
    from monitor.rigs import resolve_rig

    rig = load_rig(resolve_rig(args.rig))
    try:
        result = predict(rig)
    except PhysicsError as exc:
        raise ConfigError(
            "tank.expansion",
            rig.tank.expansion,
            f"a path the gas model can follow ({exc}); a slower draw is closer to 'isothermal' or 'polytropic'",
            rig.source_path,
        ) from exc
    if args.json:
        print(json.dumps(result.to_dict(), indent=2, sort_keys=False, allow_nan=False, default=_finite))
    else:
        print(format_prediction(result))
    return 0


def _finite(value: object) -> object:
    raise TypeError(f"not JSON serialisable: {value!r}")


def _bar(pa: float) -> str:
    return f"{pa / 1e5:,.2f} bar abs"


def format_prediction(p) -> str:
    """The prediction as a plain-text report of labelled lines."""
    rows: list[tuple[str, str] | str] = []
    add = rows.append
    add(f"Prediction for {p.rig_name}")
    add(f"{p.gas} ({p.gas_model} gas), continuous firing from a full tank")
    add("")
    add("At the regulator set point")
    add(("feed pressure / temperature", f"{_bar(p.feed_pressure_pa)} / {p.feed_temperature_k - 273.15:.1f} C"))
    add(("mass flow", f"{p.mass_flow_kg_s * 1e3:.3f} g/s"))
    add(("thrust (ambient / vacuum)", f"{p.thrust_n:.3f} N / {p.thrust_vacuum_n:.3f} N"))
    add(("Isp (ambient / vacuum)", f"{p.isp_s:.1f} s / {p.isp_vacuum_s:.1f} s"))
    add(("exit Mach / exit pressure", f"{p.exit_mach:.2f} / {_bar(p.exit_pressure_pa)}"))
    if p.flow_separation_likely:
        add(("note", "exit pressure far below ambient: the jet will likely separate in the nozzle"))
    add("")
    add("Propellant and blowdown")
    add(("loaded", f"{p.propellant_loaded_kg * 1e3:,.1f} g"))
    add(("usable (regulator holding)", f"{p.propellant_usable_kg * 1e3:,.1f} g"))
    add(("left at regulator drop-out", f"{p.propellant_below_regulator_kg * 1e3:,.1f} g"))
    add(("left when flow stops", f"{p.propellant_residual_kg * 1e3:,.1f} g"))
    add(("regulator drop-out after", f"{p.regulator_dropout_s:,.1f} s"))
    add(("flow stops after", f"{p.flow_end_s:,.1f} s (below 1 % of set-point flow)"))
    add(("total impulse (regulated)", f"{p.total_impulse_regulated_n_s:,.1f} N s"))
    add(
        (
            "total impulse (to end of flow)",
            f"{p.total_impulse_n_s:,.1f} N s ambient, {p.total_impulse_vacuum_n_s:,.1f} N s vacuum",
        )
    )
    add("")
    add("Flight")
    add(("initial mass (dry + propellant)", f"{p.initial_mass_kg:.3f} kg"))
    add(("thrust / weight", f"{p.thrust_to_weight:.3f}"))
    add(("delta-v, free space", f"{p.delta_v_m_s:.2f} m/s" + _versus(p.delta_v_m_s, p.required_delta_v_m_s, "m/s")))
    vertical = f"{p.delta_v_vertical_m_s:.2f} m/s"
    if p.thrust_to_weight < 1.0:
        vertical = "none (thrust below weight: it cannot climb)"
    add(("delta-v, vertical burn under gravity", vertical))
    if p.hover_endurance_s is not None:
        hover = f"{p.hover_endurance_s:.1f} s" + _versus(p.hover_endurance_s, p.required_hover_time_s, "s")
        if p.thrust_to_weight < 1.0:
            hover = "0 s (thrust below weight at the set point: it cannot hover)"
        add(("hover endurance", hover))
    add("")
    add("Pressure vessel")
    add(("fill pressure / MEOP", f"{_bar(p.fill_pressure_pa)} / {_bar(p.meop_pa)}"))
    if p.proof_pressure_pa is not None:
        add(("proof pressure", f"{_bar(p.proof_pressure_pa)} ({p.proof_pressure_pa / p.meop_pa:.2f} x MEOP)"))
    add(
        (
            "stored energy at fill",
            f"{p.stored_energy_brode_j / 1e3:,.1f} kJ (Brode), "
            f"{p.stored_energy_isentropic_j / 1e3:,.1f} kJ (isentropic expansion)",
        )
    )
    add("")
    add("CAUTION")
    add("  " + safety.stored_energy_line(p.stored_energy_meop_brode_j, p.tnt_equivalent_kg, "at MEOP"))
    for line in safety.GENERAL_CAUTIONS:
        add("  " + line)
    width = max(len(r[0]) for r in rows if isinstance(r, tuple)) + 2
    out = []
    for r in rows:
        out.append(f"  {r[0]:<{width}}{r[1]}" if isinstance(r, tuple) else r)
    return "\n".join(out)


def _versus(value: float, required: float | None, unit: str) -> str:
    if required is None or not math.isfinite(value):
        return ""
    verdict = "meets" if value >= required else "SHORT OF"
    return f" ({verdict} the required {required:g} {unit})"
