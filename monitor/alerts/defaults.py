"""The rules every rig gets from its own description, and rules_from_rig: those defaults plus the [[alerts]] tables.

The defaults and the choices behind their numbers are documented in docs/alerts.md. Their margins (the 10 %
reserve, the 1 % deadbands, the regulator margin) are our own choices, common practice, no source.
"""

from __future__ import annotations

from typing import Sequence

from monitor.alerts.rules import ESTIMATE_KINDS, AlertRule, unit_of
from monitor.alerts.tables import RuleContext, parse_alert_table
from monitor.config import Rig
from monitor.errors import ConfigError
from monitor.physics.tank import usable_mass_kg
from monitor.predict import tank_path

MEOP_RULE = "tank_pressure_above_meop"
RESERVE_FRACTION = 0.10  # default propellant reserve: 10 % of the usable propellant at fill
DEADBAND_FRACTION = 0.01  # default deadband: 1 % of the threshold's scale
HEADROOM_FRACTION = 0.10  # regulator margin: 10 % of the pressure range from fill down to the minimum inlet
DROOP_FRACTION = 0.10  # feed pressure more than 10 % (of the gauge set point) under the set point while firing
DROOP_ON_DELAY_S = 0.3  # the feed line fills in tens of milliseconds after the valve opens


def _rule(name: str, condition: str, signal: str, threshold: float, kind: str, **fields) -> AlertRule:
    return AlertRule(name=name, condition=condition, signal=signal, threshold=threshold,
                     unit=unit_of(condition, kind), **fields)


def default_rules(rig: Rig, channels: Sequence[object], usable_at_fill_kg: float) -> dict[str, AlertRule]:
    """The rig's default rules by name, in the order the engine shows them.

    Args:
        rig: the loaded rig.
        channels: its channel specs (objects with .name, .role, .stale_after_s), e.g. from parse_channels.
        usable_at_fill_kg: propellant that can leave the full tank before the regulator drops out, kg.

    Returns:
        name -> rule: tank pressure above MEOP and out of range (when a channel has the tank_pressure role),
        usable propellant below the reserve, delta-v and hover endurance below the requirement (when the
        vehicle states one), regulator headroom low, leak suspected, and one staleness rule per channel.
    """
    rules: list[AlertRule] = []
    tank = next((c.name for c in channels if getattr(c, "role", None) == "tank_pressure"), None)
    if tank is not None:
        meop = rig.tank.meop_pa
        rules.append(_rule(MEOP_RULE, "above", tank, meop, "pressure", severity="critical",
                           deadband=DEADBAND_FRACTION * meop, latch=True, shelvable=False, always_on=True,
                           message="Tank pressure above its MEOP: stop filling or heating, vent to a safe pressure"))
        rules.append(_rule("tank_pressure_out_of_range", "out_of_range", tank, 0.5, "pressure",
                           message="Tank pressure reading outside the sensor's valid range"))
    rules.append(_rule("propellant_reserve_low", "below", "usable_propellant_kg", RESERVE_FRACTION * usable_at_fill_kg,
                       "mass", deadband=DEADBAND_FRACTION * usable_at_fill_kg,
                       message="Usable propellant below the reserve"))
    v = rig.vehicle
    if v.required_delta_v_m_s is not None:
        rules.append(_rule("delta_v_below_required", "below", "delta_v_left_conservative_m_s",
                           v.required_delta_v_m_s, "velocity", deadband=DEADBAND_FRACTION * v.required_delta_v_m_s,
                           message="Delta-v left (conservative bound) below the required delta-v"))
    if v.required_hover_time_s is not None:
        rules.append(_rule("hover_endurance_below_required", "below", "hover_endurance_left_conservative_s",
                           v.required_hover_time_s, "time", deadband=DEADBAND_FRACTION * v.required_hover_time_s,
                           message="Hover endurance left (conservative bound) below the required hover time"))
    span = rig.tank.fill_pressure_pa - rig.regulator.min_inlet_pressure_pa
    rules.append(_rule("regulator_headroom_low", "below", "regulator_headroom_pa", HEADROOM_FRACTION * span,
                       "pressure", deadband=DEADBAND_FRACTION * span,
                       message="Tank pressure close to the regulator's minimum inlet pressure"))
    feed = next((c.name for c in channels if getattr(c, "role", None) == "feed_pressure"), None)
    if feed is not None:
        set_gauge = rig.regulator.set_pressure_pa - rig.ambient_pressure_pa
        rules.append(_rule("feed_pressure_low", "below", feed, rig.regulator.set_pressure_pa - DROOP_FRACTION * set_gauge,
                           "pressure", deadband=DEADBAND_FRACTION * set_gauge, on_delay_s=DROOP_ON_DELAY_S,
                           only_while="firing",
                           message="Feed pressure under the regulator set point while firing: droop, a restriction "
                           "or a regulator near drop-out"))
    rules.append(_rule("leak_suspected", "above", "leak_suspected", 0.5, "dimensionless", on_delay_s=1.0,
                       message="Propellant is disappearing faster than the flow meter accounts for"))
    for c in channels:
        rules.append(_rule(f"{c.name}_stale", "stale", c.name, float(c.stale_after_s), "time",
                           severity="warning" if c.name == tank else "advisory",
                           message=f"No good {c.name} sample for longer than its stale_after"))
    return {r.name: r for r in rules}


def rules_from_rig(rig: Rig, channels: Sequence[object]) -> tuple[AlertRule, ...]:
    """The rig's alert rules: the defaults (changed by [[alerts]] tables of the same name), then its own rules.

    Args:
        rig: the loaded rig; rig.alerts holds the raw [[alerts]] tables.
        channels: its channel specs (monitor.calibration.parse_channels(rig)).

    Returns:
        The rules in engine order; a table with enabled = false leaves its rule out.

    Raises:
        ConfigError: a table is wrong (naming e.g. "alerts[2].deadband", the value and what was expected), two
            tables share a name, or a table tries to disable, shelve or loosen the MEOP rule.
    """
    usable = usable_mass_kg(tank_path(rig), rig.regulator.min_inlet_pressure_pa)
    defaults = default_rules(rig, channels, usable)
    kinds = dict(ESTIMATE_KINDS)
    kinds.update({c.name: c.quantity for c in channels})  # type: ignore[attr-defined]
    ctx = RuleContext(ambient_pa=rig.ambient_pressure_pa, kinds=kinds, channels=frozenset(c.name for c in channels),
                      percent_of={"usable_propellant_kg": usable}, source=rig.source_path)
    merged: dict[str, AlertRule | None] = dict(defaults)
    seen: dict[str, int] = {}
    for index, table in enumerate(rig.alerts):
        name = table.get("name") if isinstance(table, dict) else None
        if isinstance(name, str) and name in seen:
            raise ConfigError(f"alerts[{index}].name", name, f"a name not used before (alerts[{seen[name]}] has it)",
                              rig.source_path)
        rule = parse_alert_table(table, index, ctx, defaults.get(name) if isinstance(name, str) else None)
        seen[table["name"]] = index
        merged[table["name"]] = rule
    return tuple(rule for rule in merged.values() if rule is not None)
