"""Several reviewed runs side by side: a text table of the key figures, JSON, and the overlaid HTML report."""

from __future__ import annotations

from pathlib import Path

from monitor.review.build import Review
from monitor.review.render_json import to_dict

# (label, section, key, scale, unit shown) for the side-by-side table.
COLUMNS = (
    ("burn time", "firing", "burn_time_s", 1.0, "s"),
    ("pulses", "firing", "pulse_count", 1.0, ""),
    ("impulse, estimated", "thrust", "total_impulse_estimated_n_s", 1.0, "N s"),
    ("impulse, load cell", "thrust", "total_impulse_measured_n_s", 1.0, "N s"),
    ("mean thrust, estimated", "thrust", "thrust_mean_estimated_n", 1.0, "N"),
    ("peak thrust, load cell", "thrust", "thrust_peak_measured_n", 1.0, "N"),
    ("used, flow gauge", "propellant", "used_flow_gauge_kg", 1e3, "g"),
    ("used, PVT gauge", "propellant", "used_pvt_gauge_kg", 1e3, "g"),
    ("gauge difference", "propellant", "gauge_difference_kg", 1e3, "g"),
    ("leak rate", "propellant", "leak_rate_kg_s", 1e3, "g/s"),
    ("Isp, load cell", "isp", "isp_delivered_mean_s", 1.0, "s"),
    ("Isp, estimated", "isp", "isp_estimated_mean_s", 1.0, "s"),
    ("delta-v achieved", "flight", "delta_v_achieved_m_s", 1.0, "m/s"),
    ("delta-v left", "flight", "delta_v_left_m_s", 1.0, "m/s"),
    ("hover endurance left", "flight", "hover_endurance_left_s", 1.0, "s"),
    ("bad lines", "link", "bad_line_total", 1.0, ""),
    ("stale periods", "link", "stale_periods", 1.0, ""),
)


def labels_for(reviews: list[Review]) -> list[str]:
    """Short run labels: the file names, made unique by their index when two are the same."""
    names = [Path(r.summary.log.path).name for r in reviews]
    return [n if names.count(n) == 1 else f"{k + 1}:{n}" for k, n in enumerate(names)]


def compare_rows(reviews: list[Review]) -> list[tuple[str, list[float | int | None], list[float | None]]]:
    """(label with unit, values, standard uncertainties) per compared quantity; None where not known."""
    dicts = [to_dict(r.summary) for r in reviews]
    rows = []
    for label, section, key, scale, unit in COLUMNS:
        values, stds = [], []
        for d in dicts:
            value = d[section][key]
            if isinstance(value, list):
                value = len(value)
            std = d[section].get(key + "_std")
            values.append(None if value is None else value * scale if isinstance(value, float) else value)
            stds.append(None if std is None else std * scale)
        rows.append((f"{label} ({unit})" if unit else label, values, stds))
    return rows


def render_compare_text(reviews: list[Review]) -> str:
    """The side-by-side table as text, one column per run, value ± standard uncertainty."""
    labels = labels_for(reviews)
    cells = [[_cell(v, s) for v, s in zip(values, stds)] for _, values, stds in compare_rows(reviews)]
    names = [name for name, _, _ in compare_rows(reviews)]
    width = max(len(n) for n in names) + 2
    columns = [max(len(labels[k]), *(len(c[k]) for c in cells)) + 2 for k in range(len(reviews))]
    lines = ["".ljust(width) + "".join(lab.rjust(w) for lab, w in zip(labels, columns))]
    for name, row in zip(names, cells):
        lines.append(name.ljust(width) + "".join(c.rjust(w) for c, w in zip(row, columns)))
    for label, r in zip(labels, reviews):
        for warning in r.summary.log.warnings:
            lines.append(f"WARNING ({label}): {warning}")
    return "\n".join(lines)


def compare_dict(reviews: list[Review]) -> dict:
    """{"runs": [label, ...], "summaries": [review JSON, ...]} for scripts."""
    return {"runs": labels_for(reviews), "summaries": [to_dict(r.summary) for r in reviews]}


def _cell(value, std) -> str:
    if value is None:
        return "n/a"
    if isinstance(value, int) and not isinstance(value, bool):
        return str(value)
    text = f"{value:.4g}"
    return text + (f" ± {std:.2g}" if std else "")
