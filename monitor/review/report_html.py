"""One self-contained HTML report: summary tables and matplotlib figures embedded as base64 PNG data: URIs.

Figures use the Agg backend (no display). Nothing refers to the network: no scripts, fonts or style sheets.
"""

from __future__ import annotations

import base64
import html
import io
import math

import numpy as np

from monitor.review.build import Review
from monitor.review.render_json import to_dict
from monitor.review.render_text import QUIET_CAUSES

SEVERITY_COLOURS = {"critical": "tab:red", "warning": "tab:orange", "advisory": "tab:olive"}
STYLE = """body{font-family:sans-serif;margin:2em;max-width:1100px}table{border-collapse:collapse;margin:1em 0}
td,th{border:1px solid #bbb;padding:2px 8px;text-align:right}td:first-child,th:first-child{text-align:left}
img{max-width:100%;display:block;margin:1em 0}.warn{color:#a00}"""


def _pyplot():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def _png(fig) -> str:
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=90, bbox_inches="tight")
    _pyplot().close(fig)
    return "data:image/png;base64," + base64.b64encode(buffer.getvalue()).decode("ascii")


def _alert_marks(ax, review: Review) -> None:
    for a in review.summary.alerts:
        if a.cause == "condition_set":
            ax.axvline(a.t_s, color=SEVERITY_COLOURS.get(a.severity, "grey"), lw=0.8, ls="--", alpha=0.8)


def figures(reviews: list[Review], labels: list[str]) -> list[tuple[str, str]]:
    """(title, data: URI) of each figure; several reviews are overlaid on the same axes."""
    plt = _pyplot()
    overlay = len(reviews) > 1
    out = []

    def panel(title, ylabel, draw, marks=True):
        fig, ax = plt.subplots(figsize=(10, 3.2))
        for k, (review, label) in enumerate(zip(reviews, labels)):
            draw(ax, review, (label + ": ") if overlay else "", f"C{k}" if overlay else None)
            if marks and not overlay:
                _alert_marks(ax, review)
        ax.set_xlabel("run time t (s)")
        ax.set_ylabel(ylabel)
        ax.grid(alpha=0.3)
        if ax.get_legend_handles_labels()[0]:
            ax.legend(fontsize=8, loc="best")
        ax.set_title(title + ("" if overlay else " (dashed: alerts raised)"), fontsize=10)
        out.append((title, _png(fig)))

    def thrust(ax, r, prefix, colour):
        s = r.series
        ax.plot(r.t_s, s["thrust_estimated_n"], color=colour or "C0", lw=1, label=prefix + "estimated (mdot u)")
        if np.isfinite(s["thrust_measured_n"]).any():
            ax.plot(r.t_s, s["thrust_measured_n"], color=colour or "C1", lw=1, ls=":" if colour else "-",
                    label=prefix + "load cell")
        if "predicted_thrust_n" in s:
            ax.plot(r.t_s, s["predicted_thrust_n"], color=colour or "k", lw=1, ls="--", label=prefix + "predicted")

    def flow(ax, r, prefix, colour):
        s = r.series
        ax.plot(r.t_s, s["mass_flow_filtered_kg_s"] * 1e3, color=colour or "C0", lw=1, label=prefix + "measured")
        if "predicted_mass_flow_kg_s" in s:
            ax.plot(r.t_s, s["predicted_mass_flow_kg_s"] * 1e3, color=colour or "k", lw=1, ls="--",
                    label=prefix + "predicted")

    def pressure(ax, r, prefix, colour):
        s = r.series
        for k, (role, name) in enumerate(sorted(r.roles.items())):
            ax.plot(r.t_s, s[name] / 1e5, color=colour or f"C{k}", lw=1, ls="-" if role == "tank_pressure" else ":",
                    label=prefix + role.replace("_", " "))
        if "predicted_tank_pressure_pa" in s:
            ax.plot(r.t_s, s["predicted_tank_pressure_pa"] / 1e5, color=colour or "k", lw=1, ls="--",
                    label=prefix + "tank pressure predicted")
        ax.set_yscale("log")

    def gauges(ax, r, prefix, colour):
        s = r.series
        ax.plot(r.t_s, s["propellant_flow_gauge_kg"] * 1e3, color=colour or "C0", lw=1, label=prefix + "flow gauge")
        ax.plot(r.t_s, s["propellant_pvt_gauge_kg"] * 1e3, color=colour or "C1", lw=1, ls=":" if colour else "-",
                label=prefix + "PVT gauge")
        p = r.summary.propellant
        if math.isfinite(p.leak_rate_kg_s):
            ax.plot([], [], " ", label=prefix + f"leak estimate {p.leak_rate_kg_s * 1e3:.4f} ± "
                    f"{p.leak_rate_kg_s_std * 1e3:.4f} g/s" + (" (suspected)" if p.leak_suspected else ""))

    def leak(ax, r, prefix, colour):
        ax.plot(r.t_s, r.series["leak_rate_kg_s"] * 1e3, color=colour or "C3", lw=1, label=prefix + "leak rate estimate")

    def isp(ax, r, prefix, colour):
        pulses = r.summary.pulses
        if not pulses:
            return
        t = [p.start_s for p in pulses]
        ax.plot(t, [p.isp_estimated_s for p in pulses], "o", color=colour or "C0", label=prefix + "estimated thrust")
        if r.summary.thrust.load_cell_fitted:
            ax.plot(t, [p.isp_delivered_s for p in pulses], "s", mfc="none", color=colour or "C1",
                    label=prefix + "load cell")
        if r.summary.prediction is not None:
            ax.axhline(r.summary.prediction.predicted_isp_s, color=colour or "k", ls="--", lw=0.8,
                       label=prefix + "predicted at set point")

    panel("Thrust", "thrust F (N)", thrust)
    panel("Mass flow", "mass flow (g/s)", flow)
    if any(r.roles for r in reviews):
        panel("Tank and feed pressure", "pressure (bar abs)", pressure)
    panel("Propellant in the tank by both gauges", "propellant (g)", gauges)
    panel("Leak rate estimate", "leak rate (g/s)", leak)
    panel("Delivered Isp per pulse (at pulse start)", "Isp (s)", isp)
    return out


def _table(rows: list[tuple[str, ...]], head: tuple[str, ...]) -> str:
    cells = "".join(f"<th>{html.escape(h)}</th>" for h in head)
    body = "".join("<tr>" + "".join(f"<td>{html.escape(str(c))}</td>" for c in r) + "</tr>" for r in rows)
    return f"<table><tr>{cells}</tr>{body}</table>"


def _fmt(value) -> str:
    if value is None:
        return "n/a"
    if isinstance(value, float):
        return f"{value:.6g}"
    return str(value)


def summary_rows(reviews: list[Review]) -> list[tuple[str, ...]]:
    """(key, value per review) for every scalar of the JSON schema's sections; value ± std where given."""
    dicts = [to_dict(r.summary) for r in reviews]
    rows = []
    for section in ("firing", "thrust", "propellant", "isp", "flight", "prediction"):
        first = next((d[section] for d in dicts if d[section] is not None), None)
        if first is None:
            continue
        for key in first:
            if key.endswith("_std"):
                continue
            cells = []
            for d in dicts:
                part = d[section] or {}
                value, std = part.get(key), part.get(key + "_std")
                cells.append(_fmt(value) + (f" ± {std:.2g}" if isinstance(std, float) and std > 0 else ""))
            rows.append((f"{section}.{key}", *cells))
    return rows


def render_html(reviews: list[Review], labels: list[str] | None = None, title: str = "ejecta run review") -> str:
    """The report as one HTML document (one review, or several overlaid for a comparison)."""
    labels = labels or [r.summary.log.path for r in reviews]
    parts = [f"<!DOCTYPE html><html><head><meta charset='utf-8'><title>{html.escape(title)}</title>"
             f"<style>{STYLE}</style></head><body><h1>{html.escape(title)}</h1>"]
    for label, r in zip(labels, reviews):
        log = r.summary.log
        parts.append(f"<p><b>{html.escape(label)}</b>: {html.escape(log.rig_name)} ({html.escape(log.rig_kind)}), "
                     f"started {html.escape(log.started_utc)}, {log.duration_s:.3f} s, {log.sample_count} samples</p>")
        parts += [f"<p class='warn'>Warning: {html.escape(w)}</p>" for w in log.warnings]
    parts.append("<h2>Summary</h2><p>SI units as in the key names; ± is the standard uncertainty (k = 1).</p>")
    parts.append(_table(summary_rows(reviews), ("quantity", *labels)))
    parts.append("<h2>Plots</h2>")
    for name, uri in figures(reviews, labels):
        parts.append(f"<img alt='{html.escape(name)}' src='{uri}'>")
    for label, r in zip(labels, reviews):
        s = r.summary
        if s.pulses:
            parts.append(f"<h2>Pulses: {html.escape(label)}</h2>")
            parts.append(_table([(p.index, f"{p.start_s:.3f}", f"{p.on_time_s:.3f}", _fmt(p.impulse_estimated_n_s),
                                  _fmt(p.impulse_measured_n_s), _fmt(p.propellant_kg), _fmt(p.isp_delivered_s),
                                  _fmt(p.isp_estimated_s)) for p in s.pulses],
                                ("#", "start_s", "on_time_s", "impulse_estimated_n_s", "impulse_measured_n_s",
                                 "propellant_kg", "isp_delivered_s", "isp_estimated_s")))
        alerts = [a for a in s.alerts if a.cause not in QUIET_CAUSES]
        parts.append(f"<h2>Alerts: {html.escape(label)}</h2>")
        parts.append(_table([(f"{a.t_s:.3f}", a.rule, a.severity, f"{a.from_state} → {a.to_state}", a.cause)
                             for a in alerts], ("t_s", "rule", "severity", "state", "cause")) if alerts else "<p>none</p>")
        k = s.link
        parts.append(f"<h2>Link: {html.escape(label)}</h2>")
        parts.append(_table([("lines", k.lines), ("bad lines", k.bad_line_total), ("sequence gaps", k.sequence_gaps),
                             ("link losses", k.link_losses), ("gaps between samples", k.gap_count),
                             ("longest gap (s)", f"{k.gap_longest_s:.3f}"), ("stale periods", len(k.stale_periods))]
                            + [(f"stale: {p.channel}", f"{p.start_s:.3f} s to {p.end_s:.3f} s") for p in k.stale_periods],
                            ("", "")))
    parts.append("</body></html>")
    return "".join(parts)
