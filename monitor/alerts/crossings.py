"""Vectorised condition tracking for alert rules: hysteresis latches, gating and on/off delays in sample time.

Everything here works on whole batches with numpy and returns only the few places where something changes
(change points: sample indices and new values), so the Python code above it steps through transitions, not
samples. The deadband (hysteresis) and the on/off delays follow the general definitions of ANSI/ISA-18.2 and
IEC 62682 (from memory): an alert sets when the judged quantity passes its threshold, clears only once it has
come back past the threshold by the deadband, and a delay asks the new condition to persist for that long.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

_NO_INDEX = np.empty(0, dtype=np.intp)
_NO_VALUE = np.empty(0, dtype=bool)


def latch_changes(on: np.ndarray, off: np.ndarray, seed: bool) -> tuple[np.ndarray, np.ndarray]:
    """Change points of a latch that `on` sets and `off` resets, starting from `seed` (forward fill of events).

    Args:
        on: bool per sample, True where the latch is set (wins where off is also True).
        off: bool per sample, True where it is reset. Samples with neither hold the last value.
        seed: the latch's value before the first sample.

    Returns:
        (indices, values): the samples where the latch takes a new value, and that value (bool).
    """
    hits = np.flatnonzero(on | off)
    if hits.size == 0:
        return _NO_INDEX, _NO_VALUE
    values = on[hits]
    previous = np.empty_like(values)
    previous[0] = seed
    previous[1:] = values[:-1]
    keep = values != previous
    return hits[keep], values[keep]


def value_at(index: np.ndarray, value: np.ndarray, seed: bool, at: np.ndarray) -> np.ndarray:
    """Value of a piecewise-constant bool given by change points (index, value) at the samples `at`."""
    j = np.searchsorted(index, at, side="right") - 1
    if value.size == 0:
        return np.full(at.shape, seed)
    return np.where(j >= 0, value[np.maximum(j, 0)], seed)


def and_changes(a: tuple[np.ndarray, np.ndarray], a_seed: bool,
                b: tuple[np.ndarray, np.ndarray], b_seed: bool) -> tuple[np.ndarray, np.ndarray]:
    """Change points of (a AND b), each given by its change points and its value before the batch."""
    (ai, av), (bi, bv) = a, b
    if bi.size == 0:
        return (ai, av) if b_seed else (_NO_INDEX, _NO_VALUE)
    if ai.size == 0:
        return (bi, bv) if a_seed else (_NO_INDEX, _NO_VALUE)
    at = np.union1d(ai, bi)
    both = value_at(ai, av, a_seed, at) & value_at(bi, bv, b_seed, at)
    previous = np.empty_like(both)
    previous[0] = a_seed and b_seed
    previous[1:] = both[:-1]
    keep = both != previous
    return at[keep], both[keep]


@dataclass
class DelayCarry:
    """What the delay stage remembers between batches.

    Attributes:
        value: the undelayed condition after the last sample seen.
        since_s: sample time at which it took that value, s (-inf: always had it).
        delayed: the condition after its on/off delay, after the last sample seen.
    """

    value: bool = False
    since_s: float = -math.inf
    delayed: bool = False


def delay_changes(t_s: np.ndarray, changes: tuple[np.ndarray, np.ndarray], carry: DelayCarry,
                  on_delay_s: float, off_delay_s: float) -> tuple[np.ndarray, np.ndarray]:
    """Apply on/off delays, in sample time, to a condition given by its change points; updates carry.

    Each run of the undelayed condition (a stretch of equal value) makes the delayed condition take the run's
    value at the first sample at least on_delay_s (True runs) or off_delay_s (False runs) after the run began,
    if the run lasts that long. A run that began in an earlier batch keeps its start time (carry.since_s),
    so a delay may span batches, and the result does not depend on how the samples were cut into batches.

    Args:
        t_s: sample times of the batch, s, non-decreasing.
        changes: (indices, values) where the undelayed condition changes within the batch.
        carry: state from the previous batch; updated in place.
        on_delay_s: how long a True condition must last before the delayed one follows, s (>= 0).
        off_delay_s: the same for False, s (>= 0).

    Returns:
        (indices, values): the samples where the delayed condition changes, and its new value.
    """
    n = t_s.size
    if n == 0:
        return _NO_INDEX, _NO_VALUE
    starts, values = changes
    if starts.size == 0:  # the common case: the run from before goes on through the whole batch
        if carry.delayed == carry.value:
            return _NO_INDEX, _NO_VALUE
        due_s = carry.since_s + (on_delay_s if carry.value else off_delay_s)
        if t_s[-1] < due_s:
            return _NO_INDEX, _NO_VALUE
        carry.delayed = carry.value
        return np.array([np.searchsorted(t_s, due_s, side="left")]), np.array([carry.value])
    start_t = t_s[starts]
    if starts.size == 0 or starts[0] != 0:  # the run that goes on from before the batch
        starts = np.concatenate(([0], starts))
        values = np.concatenate(([carry.value], values))
        start_t = np.concatenate(([carry.since_s], start_t))
    ends = np.empty_like(starts)
    ends[:-1] = starts[1:]
    ends[-1] = n
    due_s = start_t + np.where(values, on_delay_s, off_delay_s)
    at = np.maximum(np.searchsorted(t_s, due_s, side="left"), starts)
    fires = at < ends
    index, value = at[fires], values[fires]
    carry.value, carry.since_s = bool(values[-1]), float(start_t[-1])
    if value.size == 0:
        return _NO_INDEX, _NO_VALUE
    previous = np.empty_like(value)
    previous[0] = carry.delayed
    previous[1:] = value[:-1]
    keep = value != previous
    carry.delayed = bool(value[-1])
    return index[keep], value[keep]


def monotone_times(t_s: np.ndarray, floor_s: float = -math.inf) -> np.ndarray:
    """Sample times made non-decreasing (a clock step back holds the latest time), never below floor_s."""
    t = np.asarray(t_s, dtype=np.float64)
    if t.size and (t[0] < floor_s or (t.size > 1 and bool(np.any(t[1:] < t[:-1])))):
        t = np.maximum.accumulate(np.maximum(t, floor_s))
    return t
