"""Streaming signal blocks with state carried across batches: hold, low-pass, running integral, block means.

Each class works on whole numpy arrays per batch and keeps just enough state (the last good value, the
filter's delay line, the integral so far, the open block) that feeding the same samples in batches of any
size gives the same result up to float rounding. No per-sample Python loops.
"""

from __future__ import annotations

import numpy as np
from scipy.signal import butter, sosfilt, sosfilt_zi

# A 2nd-order low-pass is only designed while the cutoff stays well below Nyquist; otherwise it passes through.
MAX_CUTOFF_OVER_RATE = 0.4


class Hold:
    """Zero-order hold: NaN samples take the last finite value before them (carried across batches).

    Also reports, per sample, the time since that last finite value (0 for a good sample, inf before any).
    """

    def __init__(self, channels: int):
        self.last = np.full(channels, np.nan)
        self.last_t_s = np.full(channels, -np.inf)

    def __call__(self, t_s: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """values (channels, n) -> (held values, age of the held value in s), both (channels, n)."""
        channels, n = values.shape
        held, age = values.copy(), np.zeros((channels, n))
        if n == 0:
            return held, age
        good = np.isfinite(values)
        for c in np.flatnonzero(~good.all(axis=1)):  # only channels with bad samples need the hold
            index = np.maximum.accumulate(np.where(good[c], np.arange(n), -1))
            before = index < 0
            index = np.maximum(index, 0)
            held[c] = np.where(before, self.last[c], values[c, index])
            age[c] = t_s - np.where(before, self.last_t_s[c], t_s[index])
        self.last, self.last_t_s = held[:, -1].copy(), t_s[-1] - age[:, -1]
        return held, age


class LowPass:
    """2nd-order Butterworth low-pass (scipy.signal.butter, second-order sections) on several channels.

    The delay line (sosfilt's zi) is carried across batches. A channel starts at steady state on its first
    finite input, so there is no start-up transient. Inputs must be NaN-free except before a channel's
    first finite value (use Hold first); outputs are NaN there. Until design() is called, and when the
    cutoff is not below MAX_CUTOFF_OVER_RATE times the sample rate, the filter passes samples unchanged.
    """

    def __init__(self, channels: int, cutoff_hz: float):
        self.channels, self.cutoff_hz = channels, cutoff_hz
        self.sos: np.ndarray | None = None
        self.rate_hz: float | None = None
        self.zi: np.ndarray | None = None
        self.started = np.zeros(channels, dtype=bool)

    @property
    def active(self) -> bool:
        return self.sos is not None

    def design(self, rate_hz: float) -> None:
        """Design the filter for samples at rate_hz (once; later calls are ignored)."""
        if self.rate_hz is not None:
            return
        self.rate_hz = float(rate_hz)
        if self.cutoff_hz < MAX_CUTOFF_OVER_RATE * self.rate_hz:
            self.sos = butter(2, self.cutoff_hz, btype="low", output="sos", fs=self.rate_hz)
            self.zi = np.zeros((self.sos.shape[0], self.channels, 2))

    def restart(self) -> None:
        """Forget the delay line: each channel starts again at steady state on its next finite value."""
        self.started[:] = False
        if self.zi is not None:
            self.zi[:] = 0.0

    def group_delay_s(self) -> float:
        """Low-frequency group delay, s: sqrt(2) / (2 pi fc) for a 2nd-order Butterworth; 0 when passing through."""
        return float(np.sqrt(2.0) / (2.0 * np.pi * self.cutoff_hz)) if self.active else 0.0

    def __call__(self, x: np.ndarray) -> np.ndarray:
        """x (channels, n), held, NaN only before a channel's first finite value -> filtered (channels, n)."""
        if x.shape[1] == 0 or not self.active:
            return x.copy()
        if self.started.all():  # the usual case: every channel running, nothing to start or blank
            y, self.zi = sosfilt(self.sos, x, axis=1, zi=self.zi)
            return y
        finite = np.isfinite(x)
        first = np.where(finite.any(axis=1), finite.argmax(axis=1), x.shape[1])
        fresh = ~self.started & (first < x.shape[1])
        x = x.copy()
        for c in np.flatnonzero(fresh):  # one-off per channel: start at steady state on its first value
            x[c, : first[c]] = x[c, first[c]]
            self.zi[:, c, :] = sosfilt_zi(self.sos) * x[c, first[c]]
        self.started |= fresh
        idle = ~self.started
        x[idle] = 0.0
        y, self.zi = sosfilt(self.sos, x, axis=1, zi=self.zi)
        self.zi[:, idle, :] = 0.0
        y[idle] = np.nan
        for c in np.flatnonzero(fresh):
            y[c, : first[c]] = np.nan
        return y


class Integral:
    """Running trapezoidal integral of several channels over t_s, carried across batches.

    A step whose either end is NaN adds nothing (feed held values to bridge short gaps), and so does a step
    longer than the channel's max_step_s (a link loss: what happened in it is unknown).
    """

    def __init__(self, channels: int, max_step_s: np.ndarray | None = None):
        self.max_step_s = np.full(channels, np.inf) if max_step_s is None else np.asarray(max_step_s, dtype=float)
        self.total = np.zeros(channels)
        self.last_t_s = np.nan
        self.last = np.full(channels, np.nan)

    def __call__(self, t_s: np.ndarray, values: np.ndarray) -> np.ndarray:
        """values (channels, n) -> integral from the first sample ever to each sample, (channels, n)."""
        if t_s.size == 0:
            return np.empty(values.shape)
        dt = np.maximum(np.diff(t_s, prepend=self.last_t_s), 0.0)  # time never runs back
        previous = np.empty(values.shape)
        previous[:, 0] = self.last
        previous[:, 1:] = values[:, :-1]
        step = (previous + values) * (0.5 * dt)
        step[~np.isfinite(step) | (dt > self.max_step_s[:, None])] = 0.0
        step[:, 0] += self.total
        out = np.cumsum(step, axis=1)
        self.total, self.last_t_s, self.last = out[:, -1].copy(), float(t_s[-1]), values[:, -1].copy()
        return out


class BlockMeans:
    """Means of several channels over blocks of block_s on the time grid floor(t_s / block_s).

    A block closes when the first sample of a later block arrives. Means skip NaN samples (NaN where a block
    has none). For the forward fill, each sample gets the number of blocks closed up to and including it.
    """

    def __init__(self, channels: int, block_s: float):
        self.block_s = block_s
        self.block = None  # grid index of the open block
        self.sums = np.zeros(channels + 1)  # per channel, then the sum of t_s
        self.counts = np.zeros(channels + 1)

    def __call__(self, t_s: np.ndarray, values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Returns (t_mean of each closed block, means (channels, closed), closed-so-far count per sample,
        grid index of each closed block)."""
        n = t_s.size
        if n == 0:
            return np.empty(0), np.empty((values.shape[0], 0)), np.zeros(0, dtype=np.intp), np.zeros(0, np.int64)
        ids = np.maximum.accumulate(np.floor(t_s / self.block_s).astype(np.int64))
        if self.block is not None:
            ids = np.maximum(ids, self.block)
        data = np.vstack([values, t_s[None, :]])
        starts = np.flatnonzero(np.diff(ids)) + 1
        edges = np.concatenate([[0], starts])
        good = np.isfinite(data)
        sums = np.add.reduceat(np.where(good, data, 0.0), edges, axis=1)
        counts = np.add.reduceat(good.astype(float), edges, axis=1)
        closed_ids = ids[edges[1:] - 1]
        if self.block is not None and ids[0] == self.block:  # the first run continues the open block
            sums[:, 0] += self.sums
            counts[:, 0] += self.counts
            carried = 0
        else:
            carried = 1 if self.block is not None else 0
            if carried:
                closed_ids = np.concatenate([[self.block], closed_ids])
        closed_sums = np.hstack([self.sums[:, None], sums[:, :-1]]) if carried else sums[:, :-1]
        closed_counts = np.hstack([self.counts[:, None], counts[:, :-1]]) if carried else counts[:, :-1]
        self.block, self.sums, self.counts = int(ids[-1]), sums[:, -1].copy(), counts[:, -1].copy()
        with np.errstate(invalid="ignore", divide="ignore"):
            means = np.where(closed_counts > 0, closed_sums / closed_counts, np.nan)
        closing = np.zeros(n, dtype=np.intp)
        closing[starts] = 1
        if carried:
            closing[0] = 1
        return means[-1], means[:-1], np.cumsum(closing), closed_ids
