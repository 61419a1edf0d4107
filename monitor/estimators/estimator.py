"""The Estimator: calibrated batches in, every estimate per sample (Signals) and the latest state out.

Per sample (vectorised): hold, low-pass, thrust and flow estimates, running integrals. Per block of
settings.block_s (block means, forward-filled to the samples after the block closes): PVT gauge, usable
propellant, projections, gauge difference and leak fit. The same samples in batches of any size give the
same results up to float rounding; nothing depends on wall time.
"""

from __future__ import annotations

import numpy as np

from monitor.calibration import ChannelSpec
from monitor.config import Rig
from monitor.errors import ConfigError
from monitor.estimators import blocks
from monitor.estimators.filters import BlockMeans, Hold, Integral, LowPass
from monitor.estimators.propellant import LeakDetector, WindowFits
from monitor.estimators.settings import EstimationSettings, parse_estimation
from monitor.estimators.state import ESTIMATES, WITH_STD, EstimateState
from monitor.estimators.thrust import thrust_signals
from monitor.samples import Batch
from monitor.signals import Signals
from monitor.units import G0_M_S2

ROLE_ORDER = ("tank_pressure", "tank_temperature", "feed_pressure", "feed_temperature", "mass_flow", "thrust", "valve")
TP, TT, FP, FT, MF, TH, VA = range(len(ROLE_ORDER))
# The filter is designed once the sample rate is known: from settings, or measured over the first samples
# (at least RATE_MIN_SAMPLES spanning RATE_SPAN_S, or RATE_MAX_SAMPLES whatever their span).
RATE_MIN_SAMPLES, RATE_SPAN_S, RATE_MAX_SAMPLES = 32, 0.5, 20_000
TEMPERATURE_RATE_WINDOW_S = 1.0  # trailing window of the tank temperature's rate of change


def _slice(batch: Batch, a: int, b: int) -> Batch:
    """Samples a to b of a batch (a view)."""

    def cut(x):
        return None if x is None else x[a:b]

    return Batch(batch.t_s[a:b], {k: v[a:b] for k, v in batch.values.items()},
                 {k: q[a:b] for k, q in batch.quality.items()}, cut(batch.device_time_s), cut(batch.sequence))


def _concat(first: Signals, second: Signals) -> Signals:
    return Signals(np.concatenate([first.t_s, second.t_s]),
                   {k: np.concatenate([v, second.values[k]]) for k, v in first.values.items()},
                   {k: np.concatenate([v, second.std[k]]) for k, v in first.std.items()})


class Estimator:
    """Streaming estimates for one rig.

    Args:
        rig: the loaded rig (tank, regulator, nozzle, vehicle, ambient, gas).
        channels: the rig's channels (monitor.calibration.parse_channels); the estimator reads those with
            the roles tank_pressure, tank_temperature, feed_pressure, feed_temperature, mass_flow, thrust and
            valve. A missing role leaves the estimates that need it NaN.
        settings: the [estimation] settings; None reads them from rig.estimation.

    Raises:
        ConfigError: a wrong [estimation] key, or a channel named like an estimate.
    """

    def __init__(self, rig: Rig, channels: tuple[ChannelSpec, ...], settings: EstimationSettings | None = None):
        self.rig = rig
        self.settings = settings if settings is not None else parse_estimation(rig)
        self.channels = tuple(channels)
        self.specs = {c.role: c for c in self.channels if c.role is not None}
        for c in self.channels:
            if c.name in ESTIMATES:
                raise ConfigError("channels.name", c.name, "a channel name that is not an estimate's name",
                                  rig.source_path)
        s = self.settings
        self.physics = blocks.RigPhysics(rig, s, self.specs)
        self.stale_s = np.array([self.specs[r].stale_after_s if r in self.specs else np.inf for r in ROLE_ORDER])
        self.hold = Hold(len(ROLE_ORDER))
        self.lowpass = LowPass(3, s.filter_cutoff_hz)
        if s.sample_rate_hz is not None:
            self.lowpass.design(s.sample_rate_hz)
        stale = dict(zip(ROLE_ORDER, self.stale_s))
        self.integral = Integral(7, np.array([stale["mass_flow"], stale["mass_flow"], stale["thrust"], stale["thrust"],
                                              stale["mass_flow"], stale["mass_flow"], stale["valve"]]))
        self.tank_blocks = BlockMeans(5, s.block_s)
        self.flow_blocks = BlockMeans(2, s.block_s)
        self.slow = blocks.SlowEstimates(self.physics, WindowFits(1, max(5, round(TEMPERATURE_RATE_WINDOW_S / s.block_s))),
                                         LeakDetector(s.leak_window_s, s.leak_threshold_kg_s, s.leak_coverage,
                                                      s.block_s, blocks.LAG_RELATIVE_STD))
        self.flow_reference = Hold(1)
        self.output_hold = Hold(3)
        self.cd_ratio = Hold(1)
        self._firing_before = False
        self._flow_before, self._flow_before_t = np.nan, -np.inf
        self._last_t_s = np.inf  # no gap before the first sample
        filtered = [self.stale_s[i] for i in (FP, MF, TH)]
        self.gap_s = float(min(filtered))  # a longer step between samples is a link gap
        self._pulses = 0
        self._rate_first_s: float | None = None
        self._rate_count = 0
        self._state = EstimateState()

    @property
    def filter_rate_hz(self) -> float | None:
        """The sample rate the low-pass was designed for, Hz (None until known)."""
        return self.lowpass.rate_hz

    @property
    def filter_delay_s(self) -> float:
        """Low-frequency group delay of the low-pass, s (0 while it passes samples through)."""
        return self.lowpass.group_delay_s()

    def state(self) -> EstimateState:
        """The latest estimates and their uncertainties (as of the newest sample seen)."""
        return self._state

    def update(self, batch: Batch) -> Signals:
        """Consume one batch (any size) and return every estimate at each of its samples.

        Samples flagged bad are NaN in the batch. Filters and integrals hold the last good value for up to
        the channel's stale_after; beyond that the mass-flow integral takes the nozzle's flow instead and the
        thrust integrals add nothing (docs/estimates.md).
        """
        if len(batch) == 0:
            empty = np.empty(0)
            names = list(ESTIMATES) + [c.name for c in self.channels]
            return Signals(batch.t_s, {k: empty for k in names}, {k: empty for k in self._std_names()})
        if self.lowpass.rate_hz is None:
            found = self._probe_rate(batch)
            if found is not None:
                k, rate_hz = found
                first = self._pieces(_slice(batch, 0, k + 1))
                self.lowpass.design(rate_hz)
                if k + 1 == len(batch):
                    return first
                return _concat(first, self._pieces(_slice(batch, k + 1, len(batch))))
        return self._pieces(batch)

    def _pieces(self, batch: Batch) -> Signals:
        """Process a batch in pieces split at link gaps: after a gap the filters start afresh, not from before it."""
        t = np.asarray(batch.t_s, dtype=float)
        gaps = np.flatnonzero(np.diff(np.concatenate([[self._last_t_s], t])) > self.gap_s)
        edges = [int(g) for g in gaps] + [len(batch)]
        out: Signals | None = None
        start = 0
        for edge in edges:
            if edge > start:
                with np.errstate(invalid="ignore", divide="ignore"):  # NaN marks the unknown; it spreads on purpose
                    part = self._process(_slice(batch, start, edge) if (start, edge) != (0, len(batch)) else batch)
                out = part if out is None else _concat(out, part)
            if edge < len(batch):
                self.lowpass.restart()
                self._flow_before = np.nan
            start = edge
        self._last_t_s = float(t[-1])
        return out

    def _std_names(self) -> list[str]:
        return list(WITH_STD) + [c.name for c in self.channels if c.accuracy is not None]

    def _probe_rate(self, batch: Batch) -> tuple[int, float] | None:
        """Index of the sample after which the sample rate is known, and the rate; None if not yet."""
        times = batch.t_s if batch.device_time_s is None else np.asarray(batch.device_time_s, dtype=float)
        finite = np.isfinite(times)
        if not finite.any():
            return None
        if self._rate_first_s is None:
            self._rate_first_s = float(times[finite][0])
        count = self._rate_count + np.cumsum(finite)
        span = np.where(finite, times - self._rate_first_s, 0.0)
        ready = finite & (((count >= RATE_MIN_SAMPLES) & (span >= RATE_SPAN_S)) | (count >= RATE_MAX_SAMPLES))
        ready &= span > 0.0
        self._rate_count = int(count[-1])
        if not ready.any():
            return None
        k = int(ready.argmax())
        return k, float((count[k] - 1) / span[k])

    def _compensate(self, t_s: np.ndarray, flow: np.ndarray) -> np.ndarray:
        """The meter's first-order lag undone: mdot + tau dmdot/dt.

        The derivative is a difference at the sample rate (host receive times come in bursts); across a gap
        longer than the flow channel's stale_after there is none, and the sample is left as it is.
        """
        tau, rate = self.settings.mass_flow_lag_s, self.lowpass.rate_hz
        previous, self._flow_before = self._flow_before, float(flow[-1])
        previous_t, self._flow_before_t = self._flow_before_t, float(t_s[-1])
        if tau == 0.0 or rate is None:
            return flow
        derivative = np.diff(np.concatenate([[previous], flow])) * rate
        gap = np.diff(np.concatenate([[previous_t], t_s])) > self.stale_s[MF]
        return np.where(np.isfinite(derivative) & ~gap, flow + tau * derivative, flow)

    def _column(self, batch: Batch, role: str) -> np.ndarray:
        spec = self.specs.get(role)
        if spec is None or spec.name not in batch.values:
            return np.full(len(batch), np.nan)
        return np.asarray(batch.values[spec.name], dtype=float)

    def _process(self, batch: Batch) -> Signals:
        t = np.asarray(batch.t_s, dtype=float)
        phys, s = self.physics, self.settings
        raw = np.vstack([self._column(batch, role) for role in ROLE_ORDER])
        held, age = self.hold(t, raw)
        fresh = age <= self.stale_s[:, None]
        # Filter the held inputs (so the delay line runs on), then hold the outputs of good samples: a bad
        # sample repeats the last good estimate (lag-compensated flow included) until stale_after runs out.
        smooth = self.lowpass(held[[FP, MF, TH]])
        plain_flow = np.where(fresh[MF], smooth[1], np.nan)
        smooth[1] = self._compensate(t, smooth[1])
        good = np.isfinite(raw[[FP, MF, TH]])
        smooth = np.where(fresh[[FP, MF, TH]], self.output_hold(t, np.where(good, smooth, np.nan))[0], np.nan)
        feed_p, flow, thrust = smooth
        std = phys.std
        feed_p_std, flow_std, thrust_std = std("feed_pressure", feed_p), std("mass_flow", flow), std("thrust", thrust)
        if "valve" in self.specs:
            firing = np.nan_to_num(held[VA], nan=0.0) > 0.5
        else:
            firing = np.nan_to_num(plain_flow, nan=0.0) > phys.firing_flow_kg_s

        tb, means, closed, slots = self.tank_blocks(t, np.vstack([raw[TP], raw[TT], raw[FP], raw[FT], flow]))
        tank_values, tank_std = self.slow.tank(tb, slots, means)
        slow = {k: self.slow.ffill(k, v, closed) for k, v in tank_values.items()}
        slow_std = {k: self.slow.ffill(k + ".std", v, closed) for k, v in tank_std.items()}
        if "feed_temperature" in self.specs:
            feed_t = np.where(fresh[FT], held[FT], np.nan)
            feed_t_std = std("feed_temperature", feed_t)
        else:
            feed_t, feed_t_std = slow["feed_temperature_k"], slow_std["feed_temperature_k"]
        thr = thrust_signals(phys.nozzle, phys.configured_u, feed_p, feed_p_std, feed_t, feed_t_std,
                             slow["feed_gamma"], flow, flow_std, thrust, thrust_std, firing, phys.firing_flow_kg_s)
        if "valve" not in self.specs and "mass_flow" not in self.specs:  # no valve, no meter: the nozzle says
            firing = np.nan_to_num(thr.mass_flow_nozzle_kg_s, nan=0.0) > phys.firing_flow_kg_s
        rising = firing & ~np.concatenate([[self._firing_before], firing[:-1]])
        pulses = self._pulses + np.cumsum(rising)
        self._firing_before, self._pulses = bool(firing[-1]), int(pulses[-1])
        # While the meter is stale, the nozzle's flow scaled by the last apparent Cd stands in for it.
        apparent = np.where(good[1], thr.discharge_coefficient_apparent / phys.nozzle.discharge_coefficient, np.nan)
        ratio = self.cd_ratio(t, apparent[None, :])[0][0]
        ratio = np.where(np.isfinite(ratio), ratio, 1.0)
        measured = np.isfinite(flow)
        stand_in = np.where(measured, flow, thr.mass_flow_nozzle_kg_s * ratio)
        stand_in_std = np.where(measured, flow_std, thr.mass_flow_nozzle_kg_s_std * ratio)
        u, u_std = thr.exhaust_velocity_m_s, thr.exhaust_velocity_m_s_std
        thr.thrust_estimated_n = stand_in * u
        thr.thrust_estimated_n_std = np.hypot(u * stand_in_std, stand_in * u_std)
        tared = "thrust" in self.specs and self.specs["thrust"].tare_samples > 0
        integrands = np.vstack([
            stand_in, stand_in_std, thrust, np.where(firing | (not tared), thrust_std, 0.0),
            thr.thrust_estimated_n, np.where(firing, thr.thrust_estimated_n_std, 0.0), firing.astype(float),
        ])
        used, used_std, impulse, impulse_std, impulse_est, impulse_est_std, burn = self.integral(t, integrands)
        _, flow_means, closed_flow, _ = self.flow_blocks(t, np.vstack([used, used_std]))
        gauge_values, gauge_std = self.slow.gauges(tb, flow_means)
        slow.update({k: self.slow.ffill(k, v, closed_flow) for k, v in gauge_values.items()})
        slow_std.update({k: self.slow.ffill(k + ".std", v, closed_flow) for k, v in gauge_std.items()})
        values = {k: v for k, v in slow.items() if k in ESTIMATES}
        sd = {k: v for k, v in slow_std.items() if k in ESTIMATES}

        # The flow gauge per sample: the PVT gauge at the first good block minus the flow integral since then.
        lag_flow = blocks.LAG_RELATIVE_STD * s.mass_flow_lag_s * np.abs(np.nan_to_num(flow))
        values["propellant_flow_gauge_kg"] = slow["m0_kg"] - (used - slow["used_ref_kg"])
        sd["propellant_flow_gauge_kg"] = np.sqrt(slow_std["m0_kg"] ** 2 + (used_std - slow_std["used_ref_kg"]) ** 2
                                                 + lag_flow**2)

        # Time left at the current firing flow, or at the last firing's, or at the set point's before any.
        firing_flow = np.where(firing & (flow > phys.firing_flow_kg_s), flow, np.nan)
        reference = self.flow_reference(t, firing_flow[None, :])[0][0]
        reference = np.where(np.isfinite(reference), reference, slow["set_point_flow_kg_s"])
        usable, usable_std = values["usable_propellant_kg"], sd["usable_propellant_kg"]
        with np.errstate(invalid="ignore", divide="ignore"):
            time_left = np.where(usable > 0.0, usable / reference, 0.0)
            time_left = np.where(np.isfinite(usable) & (reference > 0.0), time_left, np.nan)
            values["time_left_s"] = time_left
            sd["time_left_s"] = np.hypot(usable_std / reference, time_left * std("mass_flow", reference) / reference)

        for name in ("delta_v_left", "hover_endurance_left"):
            unit = "_m_s" if name == "delta_v_left" else "_s"
            value = values[name + unit]
            values[name + "_conservative" + unit] = np.maximum(value - 2.0 * sd[name + unit], 0.0)

        thrust_known = "thrust" in self.specs
        values.update({
            "thrust_measured_n": thrust, "mass_flow_filtered_kg_s": flow,
            "total_impulse_n_s": impulse if thrust_known else np.full(t.shape, np.nan),
            "total_impulse_estimated_n_s": impulse_est, "propellant_used_kg": used, "burn_time_s": burn,
            "firing": firing.astype(float), "pulse_count": pulses.astype(float), "nozzle_feed_temperature_k": feed_t,
        })
        sd.update({"thrust_measured_n": thrust_std, "mass_flow_filtered_kg_s": flow_std,
                   "total_impulse_n_s": impulse_std if phys.has_accuracy("thrust") else np.full(t.shape, np.nan),
                   "total_impulse_estimated_n_s": impulse_est_std, "propellant_used_kg": used_std,
                   "nozzle_feed_temperature_k": feed_t_std})
        for name, array in vars(thr).items():
            (sd if name.endswith("_std") else values)[name.removesuffix("_std")] = array
        with np.errstate(invalid="ignore", divide="ignore"):
            active = (used > 0.0) & (burn > 0.0)
            values["mean_isp_s"] = np.where(active, values["total_impulse_n_s"] / (G0_M_S2 * used), np.nan)
            sd["mean_isp_s"] = np.hypot(sd["total_impulse_n_s"] / (G0_M_S2 * used), values["mean_isp_s"] * used_std / used)
        for c in self.channels:
            if c.name in batch.values:
                values[c.name] = batch.values[c.name]
                if c.accuracy is not None:
                    sd[c.name] = std(c.role or c.name, batch.values[c.name], spec=c)
        self._state = EstimateState.from_last(t[-1], values, sd)
        return Signals(t, values, sd)
