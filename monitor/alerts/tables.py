"""The rig file's [[alerts]] tables: checked key by key and turned into AlertRules (docs/alerts.md).

Every error is a ConfigError naming the key ("alerts[2].deadband", tables counted from 0), the value and what
was expected. Units go through monitor.units: pressures of channels say gauge or abs, differences never do.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, replace
from typing import Any

from monitor.alerts.rules import CONDITIONS, DIFFERENCE_SIGNALS, RULE_NAME, SEVERITIES, AlertRule, unit_of
from monitor.config import RigTable
from monitor.units import Q_, SI_UNITS, parse_pressure, parse_quantity

_COMMON_KEYS = (
    "name",
    "condition",
    "signal",
    "severity",
    "on_delay",
    "off_delay",
    "latch",
    "message",
    "enabled",
    "shelvable",
    "only_while",
)
_CONDITION_KEYS = {
    "above": ("threshold", "deadband"),
    "below": ("threshold", "deadband"),
    "rate_above": ("threshold", "deadband", "rate_window"),
    "rate_below": ("threshold", "deadband", "rate_window"),
    "disagree": ("other", "tolerance", "deadband"),
    "stale": ("stale_after",),
    "out_of_range": (),
}
_SPLIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_REFERENCE_WORDS = {"gauge", "g", "(g)", "gage", "abs", "absolute", "a", "(a)"}


@dataclass(frozen=True)
class RuleContext:
    """What checking a table needs: the rig's ambient pressure, the signals and their kinds, % references.

    Attributes:
        ambient_pa: to read gauge pressures, Pa absolute.
        kinds: signal name -> kind of quantity (a key of monitor.units.SI_UNITS).
        channels: names of the sensor channels (stale and out_of_range rules need one).
        percent_of: signal -> the amount a threshold written in % refers to, SI (usable propellant at fill).
        source: the rig file's name, for messages.
    """

    ambient_pa: float
    kinds: dict[str, str]
    channels: frozenset[str]
    percent_of: dict[str, float]
    source: str | None = None


def parse_alert_table(data: Any, index: int, ctx: RuleContext, default: AlertRule | None) -> AlertRule | None:
    """Check one [[alerts]] table: a new rule, or (same name as a default) changes to that default.

    Args:
        data: the raw table.
        index: its place among the rig's [[alerts]] tables, from 0, for messages ("alerts[2].deadband").
        ctx: the rig's context.
        default: the default rule of the same name, or None.

    Returns:
        The rule, or None when the table disables it (enabled = false).

    Raises:
        ConfigError: naming the key, the value and what was expected.
    """
    t = RigTable(data, f"alerts[{index}]", ctx.source)
    name = t.raw("name")
    if not isinstance(name, str) or not RULE_NAME.match(name):
        raise t.fail("name", "a snake_case name such as 'feed_pressure_low'")
    fixed = f"the {{}} of the default rule {name!r} (give a new rule another name)"
    condition = t.raw("condition", default.condition if default else ...)
    if condition not in CONDITIONS:
        raise t.fail("condition", "one of " + ", ".join(CONDITIONS))
    signal = t.raw("signal", default.signal if default else ...)
    if default is not None:
        for key, value, wanted in (("condition", condition, default.condition), ("signal", signal, default.signal)):
            if value != wanted:
                raise t.fail(key, f"{wanted!r}, " + fixed.format(key))
    allowed = _COMMON_KEYS + _CONDITION_KEYS[condition]
    for key in t.data:
        if key not in allowed:
            known = any(key in keys for keys in _CONDITION_KEYS.values())
            raise t.fail(key, f"no such key for condition {condition!r}" if known else "no such key here (a typo?)")
    _signal(t, "signal", signal, ctx, condition in ("stale", "out_of_range"))
    kind = ctx.kinds[signal]
    given: dict[str, Any] = {}
    if "severity" in t.data:
        given["severity"] = t.choice("severity", SEVERITIES)
    for key in ("on_delay", "off_delay"):
        if key in t.data:
            given[key + "_s"] = _time(t, key, allow_zero=True)
    for key in ("latch", "enabled", "shelvable"):
        if key in t.data and not isinstance(t.data[key], bool):
            raise t.fail(key, "true or false")
    if "latch" in t.data:
        given["latch"] = t.data["latch"]
    if "shelvable" in t.data:
        given["shelvable"] = t.data["shelvable"]
    if "message" in t.data:
        if not isinstance(t.data["message"], str):
            raise t.fail("message", "a text in quotes")
        given["message"] = t.data["message"]
    if "only_while" in t.data:
        given["only_while"] = _signal(t, "only_while", t.data["only_while"], ctx, False)
    relative = default.relative if default else False
    if condition == "disagree":
        other = t.raw("other", default.other if default else ...)
        if default is not None and other != default.other:
            raise t.fail("other", f"{default.other!r}, " + fixed.format("other"))
        _signal(t, "other", other, ctx, False)
        if ctx.kinds[other] != kind:
            raise t.fail("other", f"a signal of the same kind as {signal!r} ({kind})")
        given["other"] = other
        if "tolerance" in t.data or default is None:
            given["threshold"], relative = _tolerance(t, "tolerance", kind, signal, ctx)
            given["relative"] = relative
    elif condition == "stale":
        if "stale_after" in t.data:
            given["threshold"] = _time(t, "stale_after", allow_zero=False)
        elif default is None:
            raise t.fail("stale_after", "the age after which the channel counts as stale, such as '0.5 s'")
    elif condition == "out_of_range":
        given["threshold"] = 0.5
    else:
        if "threshold" in t.data or default is None:
            given["threshold"] = _threshold(t, condition, kind, signal, ctx)
        if condition.startswith("rate_") and "rate_window" in t.data:
            given["rate_window_s"] = _time(t, "rate_window", allow_zero=False)
    if "deadband" in t.data:
        given["deadband"] = _deadband(t, condition, kind, signal, relative, ctx)
    if default is not None and default.always_on:
        _keep_always_on(t, default, given)
    if t.data.get("enabled", True) is False:
        return None
    unit = unit_of(condition, kind, relative)
    if default is not None:
        return replace(default, unit=unit, **given)
    return AlertRule(name=name, condition=condition, signal=signal, unit=unit, **given)


def _keep_always_on(t: RigTable, default: AlertRule, given: dict[str, Any]) -> None:
    """An always-on rule (the MEOP one) may be made stricter or quieter to read, never switched off."""
    reason = f"(the {default.name!r} rule is always on)"
    if t.data.get("enabled", True) is not True:
        raise t.fail("enabled", f"true {reason}: it cannot be disabled")
    if t.data.get("shelvable", False) is not False:
        raise t.fail("shelvable", f"false {reason}: it cannot be shelved")
    if given.get("severity", default.severity) != default.severity:
        raise t.fail("severity", f"{default.severity!r} {reason}")
    if "only_while" in given:
        raise t.fail("only_while", f"no such key {reason}: it cannot be suppressed")
    threshold = given.get("threshold", default.threshold)
    if threshold > default.threshold if default.rising else threshold < default.threshold:
        side = "at most" if default.rising else "at least"
        raise t.fail("threshold", f"{side} the default's {default.threshold!r} {default.unit} {reason}")


def _signal(t: RigTable, key: str, value: Any, ctx: RuleContext, channel_only: bool) -> str:
    if channel_only:
        if value not in ctx.channels:
            raise t.fail(key, "the name of a sensor channel: " + ", ".join(sorted(ctx.channels)))
    elif value not in ctx.kinds:
        raise t.fail(
            key,
            "a channel (" + ", ".join(sorted(ctx.channels)) + ") or an estimate such as "
            "'usable_propellant_kg' (the list is in docs/alerts.md)",
        )
    return value


def _time(t: RigTable, key: str, allow_zero: bool) -> float:
    seconds = parse_quantity(t.data[key], "time", t.key(key), t.source)
    if seconds < 0.0 or (seconds == 0.0 and not allow_zero):
        raise t.fail(key, "a time of 0 s or more" if allow_zero else "a time above 0 s")
    return seconds


def _split(t: RigTable, key: str, value: Any) -> tuple[float, str]:
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value), ""
    match = _SPLIT.match(value) if isinstance(value, str) else None
    if not match:
        raise t.fail(key, "a number and its unit, as a string such as '2 bar'")
    return float(match.group(1)), match.group(2)


def _difference(t: RigTable, key: str, value: Any, kind: str) -> float:
    """A difference of two values of this kind ("2 bar", "3 K", "5 C" = 5 K), SI unit."""
    number, unit = _split(t, key, value)
    if kind == "pressure" and unit.split() and unit.split()[-1].lower() in _REFERENCE_WORDS:
        raise t.fail(key, "a pressure difference without 'gauge' or 'abs', such as '2 bar'")
    if not unit:
        return parse_quantity(number, kind, t.key(key), t.source)
    zero = parse_quantity(f"0 {unit}", kind, t.key(key), t.source)
    return parse_quantity(value, kind, t.key(key), t.source) - zero


def _rate(t: RigTable, key: str, value: Any, kind: str) -> float:
    """A rate of change of a quantity of this kind ("-2 bar/s", "0.5 K/s"), SI unit per second."""
    example = {"pressure": "-2 bar/s", "temperature": "0.5 K/s"}.get(kind, "a value per second, such as '0.1 /s'")
    number, unit = _split(t, key, value)
    target = f"({SI_UNITS[kind]}) / second"
    try:
        per_s = float((Q_(f"{number!r} {unit}") - Q_(f"0 {unit}")).to(target).magnitude)
    except Exception as exc:  # pint raises several unrelated types for text it cannot read
        raise t.fail(key, f"a rate of {kind} per second, such as {example!r} ({exc})") from exc
    if not math.isfinite(per_s):
        raise t.fail(key, "a finite rate")
    return per_s


def _percent(value: Any) -> float | None:
    if isinstance(value, str) and value.strip().endswith("%"):
        match = _SPLIT.match(value.strip()[:-1])
        if match and not match.group(2):
            return float(match.group(1)) / 100.0
    return None


def _threshold(t: RigTable, condition: str, kind: str, signal: str, ctx: RuleContext) -> float:
    value = t.raw("threshold", ...)
    if condition.startswith("rate_"):
        return _rate(t, "threshold", value, kind)
    fraction = _percent(value)
    if fraction is not None and signal in ctx.percent_of:
        return fraction * ctx.percent_of[signal]
    if signal in DIFFERENCE_SIGNALS:
        return _difference(t, "threshold", value, kind)
    if kind == "pressure":  # channel pressures are absolute: the threshold says gauge or abs
        return parse_pressure(value, t.key("threshold"), ctx.ambient_pa, t.source)
    return parse_quantity(value, kind, t.key("threshold"), t.source)


def _tolerance(t: RigTable, key: str, kind: str, signal: str, ctx: RuleContext) -> tuple[float, bool]:
    value = t.raw(key, ...)
    fraction = _percent(value)
    tolerance, relative = (fraction, True) if fraction is not None else (_difference(t, key, value, kind), False)
    if tolerance <= 0.0:
        raise t.fail(key, "a tolerance above 0, as a difference such as '2 bar' or a percentage such as '5 %'")
    return tolerance, relative


def _deadband(t: RigTable, condition: str, kind: str, signal: str, relative: bool, ctx: RuleContext) -> float:
    value = t.data["deadband"]
    if condition.startswith("rate_"):
        band = abs(_rate(t, "deadband", value, kind))
    elif condition == "disagree" and relative:
        band = _percent(value)
        if band is None:
            raise t.fail("deadband", "a percentage such as '1 %', like the tolerance")
    elif _percent(value) is not None and signal in ctx.percent_of:
        band = _percent(value) * ctx.percent_of[signal]  # type: ignore[operator]
    else:
        band = _difference(t, "deadband", value, kind)
    if band < 0.0:
        raise t.fail("deadband", "a deadband of 0 or more")
    return band
