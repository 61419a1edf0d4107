"""Per-batch reductions of the engine's per-sample signals for the review: pulses, plot buckets, stale periods.

Everything here is vectorised per batch and keeps state only per pulse, per plot bucket and per channel, so a
long log costs memory for its table, not for Python objects per sample.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from monitor.samples import Batch, Quality
from monitor.signals import Signals

# Cumulative signals read at pulse edges: differences give each pulse's share.
CUMULATIVE = ("total_impulse_estimated_n_s", "total_impulse_n_s", "propellant_used_kg")
# A pulse's window runs from its first firing sample to PULSE_TAIL_S after its last (or to the next pulse,
# if sooner), so the flow meter's lag and the thrust decay after the valve closes count with their pulse.
# The 0.25 s is about five time constants of the demo rigs' meter lag (common practice, no source).
PULSE_TAIL_S = 0.25
PLOT_BUCKETS = 4000


@dataclass
class PulseEdges:
    """Pulse edges as found so far: start/end times and the cumulative signals at the edges."""

    start_s: list[float]
    end_s: list[float]
    before: list[np.ndarray]  # CUMULATIVE values at the last sample before each pulse
    after: list[np.ndarray]  # CUMULATIVE values PULSE_TAIL_S after each pulse's end (or at the next start)
    peak_estimated_n: list[float]
    peak_measured_n: list[float]


class Collector:
    """Reduces each batch's Signals (and the batch's quality flags) as the engine produces them.

    Args:
        start_s, end_s: the log's time span, s (fixes the plot buckets).
        plotted: signal names kept as bucket means for the plots.
        stale_after_s: channel name -> its stale_after, s (for the stale periods).
        gap_s: a step between samples longer than this is a gap, s.
        prediction: optional (time_s, thrust_n, mass_flow_kg_s, tank_pressure_pa) arrays of a continuous
            firing; they are read at the run's cumulative burn time to overlay the prediction.
    """

    def __init__(self, start_s: float, end_s: float, plotted: tuple[str, ...], stale_after_s: dict[str, float],
                 gap_s: float, prediction: tuple[np.ndarray, ...] | None = None):
        span = max(end_s - start_s, 1e-9)
        self.t0_s = start_s
        self.bucket_s = span / PLOT_BUCKETS
        self.plotted = plotted + (("predicted_thrust_n", "predicted_mass_flow_kg_s", "predicted_tank_pressure_pa")
                                  if prediction is not None else ())
        self.prediction = prediction
        n = PLOT_BUCKETS + 1
        self.sums = np.zeros((len(self.plotted), n))
        self.counts = np.zeros((len(self.plotted), n))
        self.maxima = np.full((2, n), np.nan)  # estimated and measured thrust
        self.stale_after_s = stale_after_s
        self.last_alive_s = dict.fromkeys(stale_after_s, -math.inf)
        self.first_alive_s: dict[str, float | None] = dict.fromkeys(stale_after_s)
        self.stale: list[tuple[str, float, float]] = []
        self.gap_s = gap_s
        self.gaps_s: list[float] = []
        self.samples = 0
        self.first_t_s = math.nan
        self.last_t_s = -math.inf
        self.peak = np.full(2, np.nan)
        self.edges = PulseEdges([], [], [], [], [], [])
        self._firing = False
        self._last_cum = np.zeros(len(CUMULATIVE))
        self._pending: list[float] = []  # capture times PULSE_TAIL_S after a pulse end
        self._captured: list[tuple[float, np.ndarray]] = []
        self._open_peak = np.full(2, np.nan)
        self._peak_open = False

    def on_signals(self, signals: Signals, batch: Batch) -> None:
        """Fold one batch of the estimator's output into the review's figures."""
        n = len(signals)
        if not n:
            return
        t = signals.t_s
        v = signals.values
        if self.samples == 0:
            self.first_t_s = float(t[0])
        steps = np.diff(np.concatenate([[self.last_t_s], t]) if math.isfinite(self.last_t_s) else t)
        self.gaps_s.extend(steps[steps > self.gap_s].tolist())
        self.samples += n
        thrusts = np.vstack([v.get("thrust_estimated_n", np.full(n, np.nan)), v.get("thrust_measured_n", np.full(n, np.nan))])
        with np.errstate(invalid="ignore"), _quiet():
            self.peak = np.fmax(self.peak, np.nanmax(thrusts, axis=1) if np.isfinite(thrusts).any() else np.nan)
        cum = np.vstack([np.nan_to_num(v.get(k, np.zeros(n)), nan=0.0) for k in CUMULATIVE])
        self._pulses(t, v.get("firing", np.zeros(n)) > 0.5, cum, thrusts)
        self._buckets(t, v, thrusts)
        self._stale(batch)
        self.last_t_s = float(t[-1])
        self._last_cum = cum[:, -1].copy()

    def _pulses(self, t, firing, cum, thrusts) -> None:
        previous = np.concatenate([[self._firing], firing[:-1]])
        rises = np.flatnonzero(firing & ~previous)
        falls = np.flatnonzero(~firing & previous)
        self._resolve(t, cum)
        for i in rises:
            self.edges.start_s.append(float(t[i]))
            self.edges.before.append(cum[:, i - 1].copy() if i > 0 else self._last_cum.copy())
        for i in falls:
            self.edges.end_s.append(float(t[i]))
            self._pending.append(float(t[i]) + PULSE_TAIL_S)
        self._resolve(t, cum)
        # Peak thrust of each firing run in this batch, merged with a pulse still open from the last batch.
        on = np.flatnonzero(firing)
        if on.size:
            run_id = np.cumsum(np.concatenate([[True], np.diff(on) > 1]))
            starts = np.flatnonzero(np.concatenate([[True], np.diff(run_id) > 0]))
            with _quiet():
                peaks = np.fmax.reduceat(thrusts[:, on], starts, axis=1)
            run_start = on[starts]
            for k in range(starts.size):
                if run_start[k] == 0 and self._firing:  # continues the open pulse
                    self._open_peak = np.fmax(self._open_peak, peaks[:, k])
                else:
                    self._close_peak()
                    self._open_peak = peaks[:, k].copy()
                    self._peak_open = True
        if not firing[-1]:
            self._close_peak()
        self._firing = bool(firing[-1])

    def _close_peak(self) -> None:
        if self._peak_open:
            self.edges.peak_estimated_n.append(float(self._open_peak[0]))
            self.edges.peak_measured_n.append(float(self._open_peak[1]))
        self._peak_open = False
        self._open_peak = np.full(2, np.nan)

    def _resolve(self, t, cum) -> None:
        """Read the cumulative signals at pending capture times that this batch reaches."""
        while self._pending and self._pending[0] <= t[-1]:
            target = self._pending.pop(0)
            i = int(np.searchsorted(t, target, side="right")) - 1
            self._captured.append((target, cum[:, i].copy() if i >= 0 else self._last_cum.copy()))

    def _buckets(self, t, v, thrusts) -> None:
        n = t.size
        b = np.clip(((t - self.t0_s) / self.bucket_s).astype(np.int64), 0, PLOT_BUCKETS)
        starts = np.flatnonzero(np.concatenate([[True], np.diff(b) != 0]))
        ids = b[starts]
        for row, name in enumerate(self.plotted):  # one signal at a time: no stacked copy of the batch
            if name.startswith("predicted_"):
                values = self._predicted(name, v, n)
            elif name in v:
                values = np.asarray(v[name], dtype=float)
            else:
                continue  # a signal this rig does not have: its buckets stay empty
            finite = np.isfinite(values)
            self.sums[row, ids] += np.add.reduceat(np.where(finite, values, 0.0), starts)
            self.counts[row, ids] += np.add.reduceat(finite, starts)
        with _quiet():
            self.maxima[:, ids] = np.fmax(self.maxima[:, ids], np.fmax.reduceat(thrusts, starts, axis=1))

    def _predicted(self, name, v, n) -> np.ndarray:
        time_s, thrust_n, flow_kg_s, tank_pa = self.prediction
        burn = np.asarray(v.get("burn_time_s", np.zeros(n)), dtype=float)
        firing = np.asarray(v.get("firing", np.zeros(n)), dtype=float) > 0.5
        if name == "predicted_tank_pressure_pa":
            return np.interp(burn, time_s, tank_pa)
        curve = thrust_n if name == "predicted_thrust_n" else flow_kg_s
        return np.where(firing, np.interp(burn, time_s, curve, right=0.0), 0.0)

    def _stale(self, batch: Batch) -> None:
        for name, after in self.stale_after_s.items():
            quality = batch.quality.get(name)
            if quality is None:
                continue
            alive_t = batch.t_s[Quality.alive(quality)]
            if not alive_t.size:
                continue
            if self.first_alive_s[name] is None:
                self.first_alive_s[name] = float(alive_t[0])
            times = np.concatenate([[self.last_alive_s[name]], alive_t])
            steps = np.diff(times)
            for k in np.flatnonzero(np.isfinite(steps) & (steps > after)):
                self.stale.append((name, float(times[k] + after), float(times[k + 1])))
            self.last_alive_s[name] = float(alive_t[-1])

    def finish(self, end_s: float) -> None:
        """Close what is still open at the end of the log (end_s: the log's last time, s)."""
        self._close_peak()
        while self._pending:
            self._captured.append((self._pending.pop(0), self._last_cum.copy()))
        if len(self.edges.end_s) < len(self.edges.start_s):  # still firing when the log ends
            self.edges.end_s.append(self.last_t_s)
            self._captured.append((self.last_t_s, self._last_cum.copy()))
        starts = self.edges.start_s
        for k, (_, values) in enumerate(self._captured[: len(starts)]):
            nxt = k + 1
            if nxt < len(starts) and starts[nxt] < self.edges.end_s[k] + PULSE_TAIL_S:
                values = self.edges.before[nxt]  # the next pulse starts before the tail is over
            self.edges.after.append(values)
        for name, after in self.stale_after_s.items():
            last = self.last_alive_s[name]
            if end_s - last > after:
                self.stale.append((name, (last if math.isfinite(last) else self.first_t_s) + after, end_s))
        self.stale.sort(key=lambda s: s[1])

    def series(self) -> tuple[np.ndarray, dict[str, np.ndarray]]:
        """Bucket times (s) and one bucket-mean array per plotted signal, plus thrust maxima; empty buckets dropped."""
        kept = self.counts.max(axis=0) > 0
        t = self.t0_s + (np.arange(PLOT_BUCKETS + 1) + 0.5) * self.bucket_s
        with np.errstate(invalid="ignore", divide="ignore"):
            means = np.where(self.counts > 0, self.sums / np.maximum(self.counts, 1), np.nan)
        out = {name: means[i, kept] for i, name in enumerate(self.plotted)}
        out["thrust_estimated_max_n"] = self.maxima[0, kept]
        out["thrust_measured_max_n"] = self.maxima[1, kept]
        return t[kept], out


class _quiet(np.errstate):
    """Silences numpy's all-NaN warnings from fmax reductions."""

    def __init__(self):
        super().__init__(invalid="ignore")

    def __enter__(self):
        import warnings

        self._w = warnings.catch_warnings()
        self._w.__enter__()
        warnings.simplefilter("ignore", RuntimeWarning)
        return super().__enter__()

    def __exit__(self, *exc):
        self._w.__exit__(*exc)
        return super().__exit__(*exc)
