"""Review a run log: replay it through the live engine in big batches and reduce what it says to a Summary."""

from __future__ import annotations

import math
import tempfile
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from monitor.config import Rig, parse_rig
from monitor.engine import Engine
from monitor.errors import LogFormatError, PhysicsError
from monitor.health import LinkHealth
from monitor.recorder import RunLog
from monitor.review import summary as S
from monitor.review.collect import CUMULATIVE, Collector
from monitor.review.damage import copy_before, find_damage
from monitor.sources.log_stream import LogStream
from monitor.sources.replay import rig_channel_specs

BATCH_ROWS = 50_000  # rows per chunk: about 50 MB of working set; larger chunks are no faster
PLOTTED_ESTIMATES = ("thrust_estimated_n", "thrust_measured_n", "mass_flow_filtered_kg_s", "propellant_flow_gauge_kg",
                     "propellant_pvt_gauge_kg", "leak_rate_kg_s", "firing")


@dataclass(frozen=True)
class Review:
    """A reviewed log: the Summary, the plot series (bucket means on one time axis) and the plotted roles."""

    summary: S.Summary
    t_s: np.ndarray
    series: dict[str, np.ndarray]
    roles: dict[str, str]  # role (tank_pressure, feed_pressure) -> the series name holding it


def review_log(path: str | Path, with_prediction: bool = False, batch_rows: int = BATCH_ROWS) -> Review:
    """Replay a run log through the engine and summarise it.

    A log that ends in a cut-off row is reviewed without it; a log with a damaged row is reviewed up to the
    row before it. Both add a warning to summary.log.warnings.

    Args:
        path: the run log (.ejlog, or one made by `ejecta import`).
        with_prediction: also compare with the rig's pre-test prediction (continuous firing, full tank).
        batch_rows: rows the replay hands to the engine at a time.

    Raises:
        LogFormatError: missing, not a run log, a newer format, or damaged before its first row.
        ConfigError: the rig file in the header is not valid.
    """
    path = Path(path)
    log = RunLog.open(path)
    warnings = list(log.warnings)
    try:
        return _review(path, log, warnings, with_prediction, batch_rows)
    except LogFormatError:
        damage = find_damage(log)  # only a damaged log pays for the search
        if damage is None:
            raise
    if damage.good_rows == 0:
        raise LogFormatError(f"{damage.message}; no row before it to review")
    warnings.append(f"{path}, line {damage.line}: damaged row ({damage.message}); reviewed the "
                    f"{damage.good_rows} rows before it, nothing after")
    with tempfile.TemporaryDirectory(prefix="ejecta-review-") as folder:
        good = Path(folder) / path.name
        copy_before(path, damage.offset, good)
        return _review(path, RunLog.open(good), warnings, with_prediction, batch_rows)


def _review(shown: Path, log: RunLog, warnings, with_prediction, batch_rows) -> Review:
    rig = parse_rig(log.header.rig_text, f"{shown} (the rig file in its header)")
    source = LogStream(log, chunk_rows=batch_rows)
    channels = rig_channel_specs(rig, source.channels, shown)
    engine = Engine(rig, channels, trend_names=("firing",))
    health = LinkHealth(channels)
    blowdown = _blowdown(rig) if with_prediction else None
    curves = None if blowdown is None else (blowdown.time_s, blowdown.thrust_n, blowdown.mass_flow_kg_s,
                                            blowdown.tank_pressure_pa)
    roles = {c.role: c.name for c in channels if c.role in ("tank_pressure", "feed_pressure")}
    collector = Collector(source.start_s, source.end_s, PLOTTED_ESTIMATES + tuple(roles.values()),
                          {c.name: c.stale_after_s for c in channels}, engine.estimator.gap_s, curves)
    update = engine.estimator.update

    def watched(batch):
        signals = update(batch)
        collector.on_signals(signals, batch)
        return signals

    engine.estimator.update = watched  # the engine's own call, observed: the same signals the alerts judged
    for reading in source:
        health.on_reading(reading)
        engine.on_reading(reading)
        engine.advance_to(source.delivered_s)
    collector.finish(source.end_s)
    state = engine.state()
    snapshot = health.snapshot(source.end_s)
    t_s, series = collector.series()
    info = S.LogInfo(str(shown), rig.name, rig.kind, _iso(log.header.started_utc), source.start_s, source.end_s,
                     source.end_s - source.start_s, collector.samples, tuple(warnings))
    summary = _summarise(rig, channels, info, state, collector, snapshot, blowdown)
    return Review(summary, t_s, series, roles)


def _blowdown(rig: Rig):
    from monitor.physics.tank import predict_blowdown
    from monitor.predict import feed_system, tank_path

    try:
        return predict_blowdown(tank_path(rig), feed_system(rig))
    except PhysicsError as exc:
        raise LogFormatError(f"the rig in the log's header cannot be predicted: {exc}") from exc


def _summarise(rig, channels, info, state, collector: Collector, snapshot, blowdown) -> S.Summary:
    e = state.estimates
    burn = float(e.burn_time_s) if math.isfinite(e.burn_time_s) else 0.0
    edges = collector.edges
    starts, ends = np.array(edges.start_s), np.array(edges.end_s)
    on = ends - starts
    span = float(ends[-1] - starts[0]) if starts.size else 0.0
    firing = S.Firing(burn, len(starts), _agg(on, np.mean), _agg(on, np.min), _agg(on, np.max), span,
                      S.ratio(burn, span) if span > 0 else 0.0)
    load_cell = any(c.role == "thrust" for c in channels)
    used, used_std = _zero(e.propellant_used_kg), _zero(e.propellant_used_kg_std)
    i_est, i_est_std = _zero(e.total_impulse_estimated_n_s), _zero(e.total_impulse_estimated_n_s_std)
    i_meas, i_meas_std = (e.total_impulse_n_s, e.total_impulse_n_s_std) if load_cell else (math.nan, math.nan)
    if load_cell:
        i_meas, i_meas_std = _zero(i_meas), _zero(i_meas_std)
    thrust = S.Thrust(load_cell, i_est, i_est_std, i_meas, i_meas_std, _peak(collector.peak[0], burn),
                      _peak(collector.peak[1], burn) if load_cell else math.nan,
                      _mean(i_est, burn), _mean(i_est_std, burn), _mean(i_meas, burn), _mean(i_meas_std, burn))
    pvt_used = e.initial_propellant_kg - e.propellant_pvt_gauge_kg
    propellant = S.Propellant(
        e.initial_propellant_kg, e.initial_propellant_kg_std, used, used_std, pvt_used,
        math.hypot(e.initial_propellant_kg_std, e.propellant_pvt_gauge_kg_std),
        e.propellant_flow_gauge_kg, e.propellant_flow_gauge_kg_std, e.propellant_pvt_gauge_kg,
        e.propellant_pvt_gauge_kg_std, e.gauge_difference_kg, e.gauge_difference_kg_std,
        e.leak_rate_kg_s, e.leak_rate_kg_s_std, bool(e.leak_suspected))
    impulse, impulse_std = (i_meas, i_meas_std) if load_cell else (i_est, i_est_std)
    if burn > 0.0:
        isp = S.Isp(S.isp_s(i_meas, used), S.isp_std_s(i_meas, i_meas_std, used, used_std),
                    S.isp_s(i_est, used), S.isp_std_s(i_est, i_est_std, used, used_std))
        m0 = rig.vehicle.dry_mass_kg + e.initial_propellant_kg
        dv, dv_std = S.delta_v_achieved(impulse, impulse_std, used, used_std, m0, e.initial_propellant_kg_std)
    else:  # never fired: nothing delivered (the integrals hold only sensor noise)
        isp = S.Isp(0.0 if load_cell else math.nan, 0.0 if load_cell else math.nan, 0.0, 0.0)
        dv, dv_std = 0.0, 0.0
    hover = rig.kind == "hover_platform"
    flight = S.Flight(rig.vehicle.dry_mass_kg, dv, dv_std, e.delta_v_left_m_s, e.delta_v_left_m_s_std,
                      e.hover_endurance_left_s if hover else math.nan, e.hover_endurance_left_s_std if hover else math.nan)
    pulses = _pulses(edges)
    alerts = tuple(S.AlertEvent(t.t_s, t.rule, t.severity, t.from_state.value, t.to_state.value, t.cause,
                                float(t.value), float(t.threshold), t.unit) for t in state.timeline)
    raised = Counter(a.rule for a in alerts if a.cause == "condition_set")
    gaps = np.array(collector.gaps_s)
    link = S.Link(snapshot.lines, dict(snapshot.bad_lines), snapshot.bad_line_total, snapshot.sequence_gaps,
                  snapshot.link_losses, dict(snapshot.event_counts), int(gaps.size),
                  float(gaps.max()) if gaps.size else 0.0, float(gaps.sum()) if gaps.size else 0.0,
                  tuple(S.StalePeriod(c, a, b, b - a) for c, a, b in collector.stale))
    check = None if blowdown is None else _prediction(rig, blowdown, burn, used if burn > 0 else 0.0, impulse)
    return S.Summary(S.SCHEMA_VERSION, info, firing, thrust, propellant, isp, flight, pulses, alerts, dict(raised),
                     link, check)


def _pulses(edges) -> tuple[S.Pulse, ...]:
    out = []
    names = {k: i for i, k in enumerate(CUMULATIVE)}
    for k, start in enumerate(edges.start_s):
        delta = edges.after[k] - edges.before[k]
        i_est, i_meas, used = (float(delta[names[n]]) for n in CUMULATIVE)
        peak_est = edges.peak_estimated_n[k] if k < len(edges.peak_estimated_n) else math.nan
        peak_meas = edges.peak_measured_n[k] if k < len(edges.peak_measured_n) else math.nan
        out.append(S.Pulse(k + 1, start, edges.end_s[k] - start, i_est, i_meas, used, S.isp_s(i_meas, used),
                           S.isp_s(i_est, used), peak_est, peak_meas))
    return tuple(out)


def _prediction(rig, blowdown, burn_s, used_kg, impulse_n_s) -> S.PredictionCheck:
    from scipy.integrate import cumulative_trapezoid

    from monitor.predict import predict

    p = predict(rig, blowdown)
    cumulative = cumulative_trapezoid(blowdown.thrust_n, blowdown.time_s, initial=0.0)
    predicted_impulse = float(np.interp(burn_s, blowdown.time_s, cumulative))
    expelled = blowdown.tank_mass_kg[0] - blowdown.tank_mass_kg  # rises with time
    predicted_burn = float(np.interp(used_kg, expelled, blowdown.time_s)) if used_kg > 0 else 0.0
    return S.PredictionCheck(p.thrust_n, p.isp_s, predicted_impulse, S.ratio(impulse_n_s, predicted_impulse),
                             predicted_burn, S.ratio(burn_s, predicted_burn))


def _agg(values: np.ndarray, fn) -> float:
    return float(fn(values)) if values.size else 0.0


def _zero(value: float) -> float:
    """NaN -> 0 for integrals that never started (no flow, no firing): nothing was delivered."""
    return 0.0 if not math.isfinite(value) else float(value)


def _peak(value: float, burn_s: float) -> float:
    return float(value) if math.isfinite(value) else (0.0 if burn_s == 0.0 else math.nan)


def _mean(impulse: float, burn_s: float) -> float:
    return impulse / burn_s if burn_s > 0 and math.isfinite(impulse) else (0.0 if burn_s == 0.0 else math.nan)


def _iso(started) -> str:
    """The log's start time as ISO 8601 text (whatever type the header gives)."""
    return started.isoformat() if hasattr(started, "isoformat") else str(started)
