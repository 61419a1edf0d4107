"""The monitor's view model: a Snapshot in, every string the screens show out (pure: no textual, no clock, no I/O).

build_view(snapshot, units, settings) gives a MonitorView whose strings are exactly what the screen prints;
monitor.ui.layout arranges them for a given width and height. The only physics called is the stored energy
of the caution line (monitor.physics.energy, Brode 1959), from the tank pressure the snapshot carries.
Uncertainties are shown as plus or minus two standard uncertainties (coverage factor k = 2, about 95 % for
a normal distribution; GUM, JCGM 100:2008, section 6.2-6.3, from memory), and the screen says so.
"""

from __future__ import annotations

import math

import numpy as np

from monitor.ui.alert_view import alert_rows, banner, link_view
from monitor.ui.display import DisplayUnits, decimals_for, number, run_time
from monitor.ui.model import (
    MODE_WORDS,
    STATE_WORDS,
    WINDOWS_S,
    AlertRow,
    Banner,
    ChannelRow,
    LinkView,
    MonitorView,
    Tile,
    Trend,
    ViewSettings,
)
from monitor.ui.numbers import caution_texts, latest, tiles

__all__ = ["STATE_WORDS", "WINDOWS_S", "AlertRow", "Banner", "ChannelRow", "LinkView", "MonitorView", "Tile", "Trend",
           "ViewSettings", "build_view", "caution_texts", "next_selection", "next_window"]

TREND_LABELS = {"thrust_estimated_n": "thrust est", "thrust_measured_n": "load cell",
                "mass_flow_filtered_kg_s": "mass flow", "propellant_flow_gauge_kg": "prop·flow",
                "propellant_pvt_gauge_kg": "prop·pVT"}
ROLE_LABELS = {"tank_pressure": "tank p", "feed_pressure": "feed p", "tank_temperature": "tank T",
               "feed_temperature": "feed T", "mass_flow": "flow meter", "thrust": "load cell"}


def build_view(snapshot, units: DisplayUnits, settings: ViewSettings | None = None,
               replay_path: str | None = None) -> MonitorView:
    """The view of one snapshot (monitor.session.Snapshot) with the operator's settings.

    replay_path: the run log being replayed, shown on the link line (a snapshot does not carry it).
    """
    settings = settings or ViewSettings()
    rig = snapshot.rig
    times, series = snapshot.trends
    alerts, selected, summary = alert_rows(snapshot, units, settings.selected)
    return MonitorView(
        mode=snapshot.mode,
        title=f"{MODE_WORDS.get(snapshot.mode, snapshot.mode.upper())} · {rig.name}",
        status=status_text(snapshot),
        cautions=caution_texts(rig, latest(series.get(units.roles.get("tank_pressure", ""))), units),
        banner=banner(snapshot, units),
        tiles=tiles(snapshot.engine.estimates, rig, units),
        trends=trends(times, series, units, settings.window_s),
        window_s=settings.window_s,
        alerts=alerts,
        alert_summary=summary,
        selected=selected,
        link=link_view(snapshot, units, replay_path),
        t_s=snapshot.t_s,
    )


def status_text(snapshot) -> str:
    """Run time, then the recording or replay state."""
    parts = [f"run {run_time(snapshot.t_s)}"]
    r = snapshot.replay
    if r is not None:
        state = "END OF LOG" if r.finished else ("PAUSED" if r.paused else "playing")
        parts.append(f"{state} x{r.speed:g} · {r.position_s - r.start_s:.1f}/{r.end_s - r.start_s:.1f} s")
    elif snapshot.recording_path is not None:
        parts.append("● REC")
    else:
        parts.append("not recording")
    if snapshot.stopped:
        parts.append("STOPPED")
    return " · ".join(parts)


def trend_label(name: str, units: DisplayUnits) -> str:
    role = next((r for r, n in units.roles.items() if n == name), None)
    return TREND_LABELS.get(name) or ROLE_LABELS.get(role or "", name)


def trends(times, series: dict, units: DisplayUnits, window_s: float) -> tuple[Trend, ...]:
    """The trends of the window: thrust, flow, pressures, both propellant gauges, in display units."""
    times = np.asarray(times, dtype=float)
    keep = times >= times[-1] - window_s if times.size else np.zeros(0, dtype=bool)
    out = []
    for name, values in series.items():
        if name == "thrust_measured_n" and "thrust" not in units.roles:
            continue
        unit = units.signal(name)
        shown_values = unit(np.asarray(values, dtype=float)[keep])
        finite = shown_values[np.isfinite(shown_values)]
        low, high = (float(finite.min()), float(finite.max())) if finite.size else (math.nan, math.nan)
        d = decimals_for(max(abs(low), abs(high))) if finite.size else 0
        out.append(Trend(name, trend_label(name, units), unit.symbol, times[keep], shown_values,
                         number(latest(shown_values), d), number(low, d), number(high, d)))
    return tuple(out)


def next_window(window_s: float, step: int) -> float:
    """The trend window one step shorter (-1) or longer (+1), within WINDOWS_S."""
    index = min(range(len(WINDOWS_S)), key=lambda k: abs(WINDOWS_S[k] - window_s))
    return WINDOWS_S[min(max(index + step, 0), len(WINDOWS_S) - 1)]


def next_selection(view: MonitorView, step: int) -> str | None:
    """The alert above (-1) or below (+1) the selected one."""
    names = [r.name for r in view.alerts]
    if not names:
        return None
    index = names.index(view.selected) if view.selected in names else 0
    return names[min(max(index + step, 0), len(names) - 1)]
