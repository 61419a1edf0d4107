"""Display units and number formats for the monitor: SI values to the numbers and unit symbols the operator reads.

Channels are shown in the unit their rig file chose (ChannelSpec.display_unit); estimates in fixed units of our
choice (N, g or kg, g/s, m/s, s); alert values in the unit of the signal their rule judges. Nothing here
computes physics: a display unit is a scale and an offset, found once with monitor.units (pint) or taken
from the channel's calibration.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from monitor.alerts.rules import DIFFERENCE_SIGNALS, ESTIMATE_KINDS
from monitor.config import Rig
from monitor.recorder.format import SI_COLUMNS
from monitor.units import convert

DASH = "--"  # shown for a value that is not known (NaN)
LARGE_TANK_M3 = 0.020  # propellant is shown in kg for bottles above 20 L, in g up to that (our choice)
# Estimate kind -> display unit (as pint spells it, and as the screen shows it); mass is chosen per rig.
_ESTIMATE_UNITS = {
    "force": ("N", "N"),
    "mass_flow": ("g/s", "g/s"),
    "velocity": ("m/s", "m/s"),
    "time": ("s", "s"),
    "impulse": ("N*s", "N s"),
    "dimensionless": ("dimensionless", ""),
}


@dataclass(frozen=True)
class Unit:
    """A display unit: shown = (value_si - offset) / scale, written with `symbol`."""

    symbol: str
    scale: float = 1.0
    offset: float = 0.0
    flag: bool = False  # a 0/1 quantity shown as yes/no

    def __call__(self, value_si):
        return (value_si - self.offset) / self.scale

    def span(self) -> "Unit":
        """The same unit for a difference of two values (no gauge offset, no 'g'/'a' suffix)."""
        return Unit(span_symbol(self.symbol), self.scale)

    def per_second(self) -> "Unit":
        return Unit(f"{span_symbol(self.symbol)}/s", self.scale)


def short_unit(text: str) -> str:
    """'bar gauge' -> 'bar g', 'kPa abs' -> 'kPa a', 'C' -> 'C'; other units unchanged."""
    words = text.split()
    if len(words) > 1 and words[-1].lower() in ("gauge", "gage"):
        return " ".join(words[:-1]) + " g"
    if len(words) > 1 and words[-1].lower() in ("abs", "absolute"):
        return " ".join(words[:-1]) + " a"
    return text


def span_symbol(symbol: str) -> str:
    """The symbol of a difference: 'bar g' -> 'bar'."""
    words = symbol.split()
    return " ".join(words[:-1]) if len(words) > 1 and words[-1] in ("g", "a") else symbol


def si_unit(kind: str, symbol: str) -> Unit:
    """A linear display unit of one kind of quantity, its scale found with pint (monitor.units.convert)."""
    pint_name, shown = symbol
    if kind == "dimensionless":
        return Unit(shown)
    return Unit(shown, 1.0 / convert(1.0, kind, pint_name))


class DisplayUnits:
    """The display unit of every channel, estimate and alert rule of one rig.

    Args:
        rig: the rig (tank volume decides grams or kilograms).
        channels: ChannelSpecs (display_unit, display_scale, display_offset) or objects with .name and
            .quantity only (shown in SI).
        rules: the engine's AlertRules (for the unit of each alert's value).
    """

    def __init__(self, rig: Rig, channels, rules=()):
        self.rig = rig
        self.roles = {getattr(c, "role", None): c.name for c in channels if getattr(c, "role", None)}
        self.channels: dict[str, Unit] = {}
        self.kinds: dict[str, str] = {}
        for c in channels:
            self.kinds[c.name] = c.quantity
            if hasattr(c, "display_unit"):
                self.channels[c.name] = Unit(short_unit(c.display_unit), c.display_scale, c.display_offset)
            else:
                self.channels[c.name] = Unit(SI_COLUMNS[c.quantity][0])
        mass = ("kg", "kg") if rig.tank.volume_m3 > LARGE_TANK_M3 else ("g", "g")
        self.by_kind = {kind: si_unit(kind, sym) for kind, sym in _ESTIMATE_UNITS.items()}
        self.by_kind["mass"] = si_unit("mass", mass)
        self.pressure = self.channels.get(self.roles.get("tank_pressure", ""), Unit("bar a", 1e5))
        self.by_kind["pressure"] = self.pressure
        self.rules = {r.name: self._rule_unit(r) for r in rules}
        self.rising = {r.name: r.rising for r in rules}

    def signal(self, name: str) -> Unit:
        """The display unit of a channel or an estimate signal (SI for anything unknown)."""
        if name in self.channels:
            return self.channels[name]
        kind = ESTIMATE_KINDS.get(name)
        if name == "leak_suspected":
            return Unit("", flag=True)
        if kind is None:
            return Unit("")
        unit = self.by_kind.get(kind, Unit(SI_COLUMNS.get(kind, ("",))[0]))
        return unit.span() if name in DIFFERENCE_SIGNALS else unit

    def _rule_unit(self, rule) -> Unit:
        if rule.condition == "stale":
            return self.by_kind["time"]
        if rule.condition == "out_of_range":
            return Unit("", flag=True)
        base = self.signal(rule.signal)
        if rule.condition.startswith("rate_"):
            return base.per_second()
        if rule.condition == "disagree":
            return Unit("%", 0.01) if rule.relative else base.span()
        return base

    def rule(self, name: str, unit_si: str = "") -> Unit:
        """The display unit of an alert rule's value and threshold (SI symbol `unit_si` if unknown)."""
        return self.rules.get(name, Unit(unit_si))


def decimals_for(value: float, most: int = 3) -> int:
    """Decimals that give about four significant digits: 3 below 10, 2 below 100, 1 below 1000, else 0."""
    if not math.isfinite(value):
        return 0
    magnitude = abs(value)
    for decimals, limit in ((3, 10.0), (2, 100.0), (1, 1000.0)):
        if magnitude < limit:
            return min(decimals, most)
    return 0


def number(value: float, decimals: int | None = None) -> str:
    """A value with `decimals` (default: decimals_for), DASH when it is not finite."""
    if value is None or not math.isfinite(value):
        return DASH
    d = decimals_for(value) if decimals is None else decimals
    text = f"{value:.{d}f}"
    return text[1:] if text.startswith("-") and float(text) == 0.0 else text  # no "-0.000"


def plus_minus(spread: float, decimals: int) -> str:
    """'±0.008' with the value's decimals; '' when the spread is not known."""
    if spread is None or not math.isfinite(spread):
        return ""
    return f"±{spread:.{decimals}f}"


def shown(value_si: float, unit: Unit, decimals: int | None = None) -> str:
    """An SI value as the screen writes it: number, space, unit symbol ('162.1 bar g'); flags as yes/no."""
    if unit.flag:
        return DASH if not math.isfinite(value_si) else ("yes" if value_si > 0.5 else "no")
    text = number(unit(value_si), decimals)
    return f"{text} {unit.symbol}".rstrip() if text != DASH else DASH


def run_time(t_s: float | None) -> str:
    """Run time as '12.3 s' below 100 s, '12:34' (min:s) below an hour, '1:02:03' above."""
    if t_s is None or not math.isfinite(t_s):
        return DASH
    if abs(t_s) < 100.0:
        return f"{t_s:.1f} s"
    whole = int(round(t_s))
    hours, rest = divmod(whole, 3600)
    minutes, seconds = divmod(rest, 60)
    return f"{hours}:{minutes:02d}:{seconds:02d}" if hours else f"{minutes}:{seconds:02d}"
