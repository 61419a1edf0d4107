"""The Summary as plain text: labelled lines, values in engineering units with their standard uncertainty."""

from __future__ import annotations

import math

from monitor.review.summary import Summary

MAX_PULSE_ROWS = 40
MAX_ALERT_ROWS = 60
QUIET_CAUSES = ("suppressed", "unsuppressed")  # a rule switched off and on by its own condition (e.g. not firing)


def _num(value: float, scale: float = 1.0, digits: int = 3) -> str:
    return "n/a" if value is None or not math.isfinite(value) else f"{value * scale:,.{digits}f}"


def _pm(value: float, std: float, unit: str, scale: float = 1.0, digits: int = 3) -> str:
    if value is None or not math.isfinite(value):
        return "n/a"
    text = f"{_num(value, scale, digits)}"
    if std is not None and math.isfinite(std) and std > 0:
        text += f" ± {_num(std, scale, digits)}"
    return f"{text} {unit}"


def render_text(s: Summary) -> str:
    """A readable report of the Summary (uncertainties are standard uncertainties, k = 1)."""
    out: list[str] = []
    row = lambda label, text: out.append(f"  {label:<34} {text}")  # noqa: E731
    log = s.log
    out.append(f"Review of {log.path}")
    out.append(f"{log.rig_name} ({log.rig_kind}), started {log.started_utc}, {log.duration_s:,.2f} s, "
               f"{log.sample_count:,} samples")
    for warning in log.warnings:
        out.append(f"WARNING: {warning}")
    f = s.firing
    out += ["", "Firing"]
    row("burn time", f"{f.burn_time_s:,.3f} s")
    row("valve pulses", f"{f.pulse_count}")
    if f.pulse_count:
        row("on-time mean / min / max", f"{f.pulse_on_time_mean_s:.3f} / {f.pulse_on_time_min_s:.3f} / "
            f"{f.pulse_on_time_max_s:.3f} s")
        row("duty (burn / firing span)", f"{f.duty_cycle * 100:.1f} % of {f.firing_span_s:,.3f} s")
    t = s.thrust
    out += ["", "Thrust and impulse (± standard uncertainty)"]
    row("total impulse, estimated", _pm(t.total_impulse_estimated_n_s, t.total_impulse_estimated_n_s_std, "N s"))
    row("total impulse, load cell", _pm(t.total_impulse_measured_n_s, t.total_impulse_measured_n_s_std, "N s")
        if t.load_cell_fitted else "no load cell fitted")
    row("peak thrust, estimated / load cell", f"{_num(t.thrust_peak_estimated_n)} / {_num(t.thrust_peak_measured_n)} N")
    row("mean thrust while firing, estimated", _pm(t.thrust_mean_estimated_n, t.thrust_mean_estimated_n_std, "N"))
    if t.load_cell_fitted:
        row("mean thrust while firing, load cell", _pm(t.thrust_mean_measured_n, t.thrust_mean_measured_n_std, "N"))
    p = s.propellant
    out += ["", "Propellant"]
    row("loaded at start (PVT)", _pm(p.initial_kg, p.initial_kg_std, "g", 1e3))
    row("used, flow gauge", _pm(p.used_flow_gauge_kg, p.used_flow_gauge_kg_std, "g", 1e3))
    row("used, PVT gauge", _pm(p.used_pvt_gauge_kg, p.used_pvt_gauge_kg_std, "g", 1e3))
    row("gauges disagree by (flow - PVT)", _pm(p.gauge_difference_kg, p.gauge_difference_kg_std, "g", 1e3))
    row("leak rate estimate", _pm(p.leak_rate_kg_s, p.leak_rate_kg_s_std, "g/s", 1e3, 4)
        + ("  (leak suspected)" if p.leak_suspected else ""))
    i = s.isp
    out += ["", "Delivered Isp"]
    row("mean, load cell", _pm(i.isp_delivered_mean_s, i.isp_delivered_mean_s_std, "s", 1, 2))
    row("mean, estimated thrust", _pm(i.isp_estimated_mean_s, i.isp_estimated_mean_s_std, "s", 1, 2))
    fl = s.flight
    out += ["", f"Flight (dry mass {fl.dry_mass_kg:.3f} kg)"]
    row("delta-v achieved", _pm(fl.delta_v_achieved_m_s, fl.delta_v_achieved_m_s_std, "m/s", 1, 2))
    row("delta-v still available", _pm(fl.delta_v_left_m_s, fl.delta_v_left_m_s_std, "m/s", 1, 2))
    if math.isfinite(fl.hover_endurance_left_s):
        row("hover endurance left", _pm(fl.hover_endurance_left_s, fl.hover_endurance_left_s_std, "s", 1, 2))
    if s.pulses:
        out += ["", "Pulses", "      #    start s     on s   I est N s  I cell N s      prop g   Isp cell s    Isp est s"]
        for q in s.pulses[:MAX_PULSE_ROWS]:
            out.append(f"  {q.index:5d} {q.start_s:10.3f} {q.on_time_s:8.3f} {_num(q.impulse_estimated_n_s, 1, 4):>11} "
                       f"{_num(q.impulse_measured_n_s, 1, 4):>11} {_num(q.propellant_kg, 1e3, 4):>11} "
                       f"{_num(q.isp_delivered_s, 1, 2):>12} {_num(q.isp_estimated_s, 1, 2):>12}")
        if len(s.pulses) > MAX_PULSE_ROWS:
            out.append(f"  ... {len(s.pulses) - MAX_PULSE_ROWS} more pulses (all of them are in --json and --report)")
    shown = [a for a in s.alerts if a.cause not in QUIET_CAUSES]
    out += ["", "Alerts (suppression changes left out; all transitions are in --json)"]
    if not shown:
        out.append("  none")
    for a in shown[:MAX_ALERT_ROWS]:
        out.append(f"  {a.t_s:10.3f} s  {a.rule:<32} {a.severity:<9} {a.from_state} -> {a.to_state} ({a.cause})")
    if len(shown) > MAX_ALERT_ROWS:
        out.append(f"  ... {len(shown) - MAX_ALERT_ROWS} more transitions (all of them are in --json)")
    k = s.link
    out += ["", "Link"]
    bad = ", ".join(f"{n} {c}" for n, c in sorted(k.bad_lines.items())) or "none"
    row("lines / bad lines", f"{k.lines:,} / {k.bad_line_total:,} ({bad})")
    row("sequence gaps (lines lost)", f"{k.sequence_gaps:,}")
    row("link losses", f"{k.link_losses}")
    row("gaps between samples", f"{k.gap_count} (longest {k.gap_longest_s:.3f} s, total {k.gap_total_s:.3f} s)")
    row("stale periods", f"{len(k.stale_periods)}")
    for sp in k.stale_periods[:20]:
        out.append(f"    {sp.channel:<24} {sp.start_s:10.3f} s to {sp.end_s:10.3f} s ({sp.duration_s:.3f} s)")
    if s.prediction is not None:
        c = s.prediction
        out += ["", "Against the prediction (continuous firing from a full tank)"]
        row("predicted thrust / Isp at set point", f"{c.predicted_thrust_n:.4g} N / {c.predicted_isp_s:.2f} s")
        row("total impulse measured / predicted", f"{_num(c.total_impulse_ratio, 1, 4)}"
            f"  (predicted {c.predicted_total_impulse_n_s:,.3f} N s for the burn time)")
        row("burn time measured / predicted", f"{_num(c.burn_time_ratio, 1, 4)}"
            f"  (predicted {c.predicted_burn_time_s:,.3f} s for the propellant used)")
    return "\n".join(out)
