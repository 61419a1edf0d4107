"""The alert list, the attention banner and the link health, as the screen writes them."""

from __future__ import annotations

import math

from monitor.alerts.states import AlertState
from monitor.ui.display import DASH, DisplayUnits, Unit, run_time, shown
from monitor.ui.model import LISTED_STATES, SEVERITY_MARKS, STATE_WORDS, AlertRow, Banner, ChannelRow, LinkView


def _limit(status, unit: Unit, rising: bool) -> str:
    """'> 230.0 bar g' ('' for a yes/no quantity, whose limit is the flag itself)."""
    if unit.flag:
        return ""
    return f"{'>' if rising else '<'} {shown(status.threshold, unit)}"


def alert_rows(snapshot, units: DisplayUnits, selected: str | None) -> tuple[tuple[AlertRow, ...], str | None, str]:
    """The alerts that are not normal (or suppressed), most severe first; the selection; a summary line."""
    listed = [a for a in snapshot.engine.alerts if a.state in LISTED_STATES]
    names = [a.name for a in listed]
    if selected not in names:
        selected = names[0] if names else None
    rows = []
    for a in listed:
        unit = units.rule(a.name, a.unit)
        marks, word, _ = SEVERITY_MARKS.get(a.severity, ("?  ", a.severity[:4].upper(), a.severity.upper()))
        short, long = STATE_WORDS[a.state]
        if a.state.value.startswith("active") and not a.condition:
            long += " (latched: the condition has gone)"
        when = run_time(a.since_s)
        if a.state == AlertState.SHELVED and a.shelved_until_s is not None:
            when = run_time(max(a.shelved_until_s - snapshot.t_s, 0.0)).replace(" s", "s") + " left"
        rows.append(AlertRow(a.name, a.severity, marks, word, short, long, when, shown(a.value, unit),
                             _limit(a, unit, units.rising.get(a.name, True)), a.message,
                             a.state.unacknowledged, a.name == selected))
    new = sum(r.unacknowledged for r in rows)
    summary = (f"ALERTS {len(rows)} ({new} new) · {len(snapshot.engine.alerts)} rules"
               if rows else f"ALERTS none · {len(snapshot.engine.alerts)} rules, all quiet")
    return tuple(rows), selected, summary


def banner(snapshot, units: DisplayUnits) -> Banner | None:
    """The banner for the engine's top alarm (a new, unacknowledged alert of the top severity), if any."""
    a = snapshot.engine.top_alarm
    if a is None:
        return None
    unit = units.rule(a.name, a.unit)
    _, _, word = SEVERITY_MARKS.get(a.severity, ("", "", a.severity.upper()))
    if a.state != AlertState.ACTIVE_UNACKNOWLEDGED:
        state = "CLEARED, not yet acknowledged"
    else:
        state = "ACTIVE" if a.condition else "ACTIVE (latched: the condition has gone)"
    limit = _limit(a, unit, units.rising.get(a.name, True))
    facts = f"{state} since {run_time(a.since_s)} · value {shown(a.value, unit)}" + (f" · limit {limit}" if limit else "")
    return Banner(a.name, a.severity, f"▲▲▲ {word} ▲▲▲ {a.name}", a.message, facts,
                  "press a to acknowledge")


def link_view(snapshot, units: DisplayUnits, replay_path: str | None = None) -> LinkView:
    """Link health: per-channel rate, age and bad samples; lines, bad lines, gaps; recording or replay file."""
    h = snapshot.health
    rows = tuple(
        ChannelRow(c.name, f"{c.rate_hz:.0f} Hz", "never" if math.isinf(c.age_s) else f"{max(c.age_s, 0.0):.2f} s",
                   f"{c.bad_samples:,}", c.stale)
        for c in h.channels
    )
    rates = sorted({round(c.rate_hz) for c in h.channels})
    rate = DASH if not rates else f"{rates[0]} Hz" if len(rates) == 1 else f"{rates[0]}-{rates[-1]} Hz"
    state = "up" if h.link_up else "DOWN"
    stale = tuple(r.name for r in rows if r.stale)
    summary = (f"LINK {state} · {len(rows)} ch {rate} · {h.lines:,} lines, {h.bad_line_total:,} bad · "
               f"{h.sequence_gaps:,} gaps · {h.link_losses} losses")
    if snapshot.replay is not None:
        recording = f"{replay_path or 'a run log'} (replay, not recording)"
    elif snapshot.recording_path is not None:
        recording = f"REC {snapshot.recording_path} · {snapshot.recording_rows:,} rows"
    else:
        recording = "not recording"
    events = tuple(f"{run_time(e.t_s)} {e.kind} {e.detail}".rstrip() for e in h.recent_events[-5:])
    problems = tuple(f"{f.listener} failed at {run_time(f.t_s)}: {f.message}" for f in snapshot.failures)
    problems += tuple(snapshot.notes)
    brief = f"LINK {state} · {rate} · {h.bad_line_total:,} bad lines" + (f" · STALE {', '.join(stale)}" if stale else "")
    return LinkView(h.link_up, brief, summary, stale, recording, rows, events, problems)
