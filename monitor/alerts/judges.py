"""The quantity each kind of alert rule judges, per sample of a batch: a value, a rate, a difference or an age.

A judge turns one batch (times, signal values, quality bits) into the array the rule compares with its
threshold, NaN where it cannot be known, plus the input values worth recording beside a transition. Judges
keep what they need across batches (the rate's look-back window, a channel's last good sample), so a batch of
one sample and a whole log give the same numbers.
"""

from __future__ import annotations

import math

import numpy as np

from monitor.alerts.rules import AlertRule
from monitor.samples import Quality


class _History:
    """A growing buffer of the (t, x) samples of the last window, kept contiguous for searchsorted."""

    def __init__(self) -> None:
        self.t, self.x = np.empty(64), np.empty(64)
        self.lo = self.hi = 0

    def view(self) -> tuple[np.ndarray, np.ndarray]:
        return self.t[self.lo:self.hi], self.x[self.lo:self.hi]

    def append(self, t: np.ndarray, x: np.ndarray, window_s: float) -> None:
        """Add samples, then drop all but the newest one older than window_s before the last sample."""
        m, size = t.size, self.hi - self.lo
        if self.hi + m > self.t.size:
            capacity = max(self.t.size, 2 * (size + m))
            new_t, new_x = np.empty(capacity), np.empty(capacity)
            new_t[:size], new_x[:size] = self.view()
            self.t, self.x, self.lo, self.hi = new_t, new_x, 0, size
        self.t[self.hi:self.hi + m], self.x[self.hi:self.hi + m] = t, x
        self.hi += m
        if self.hi > self.lo:
            keep = int(np.searchsorted(self.t[self.lo:self.hi], self.t[self.hi - 1] - window_s, side="right")) - 1
            self.lo += max(keep, 0)


class Judge:
    """Computes a rule's judged quantity; subclasses per condition. One Judge per rule, stateful."""

    def __init__(self, rule: AlertRule):
        self.rule = rule

    def inputs(self) -> tuple[str, ...]:
        """Signal names whose values are recorded beside a transition."""
        return (self.rule.signal,)

    def quantity(self, t_s: np.ndarray, values: dict[str, np.ndarray],
                 quality: dict[str, np.ndarray] | None) -> np.ndarray | None:
        """Judged quantity per sample (NaN: unknown), or None when the batch carries no input of this rule."""
        return values.get(self.rule.signal)

    def at_time(self, now_s: float, last_good_t_s: dict[str, float]) -> float:
        """Judged quantity at a moment without samples (tick): NaN (hold) except for time-based rules."""
        return math.nan


class LevelJudge(Judge):
    """above / below: the signal itself."""


class RateJudge(Judge):
    """rate_above / rate_below: slope over the look-back window, (x_i - x_j) / (t_i - t_j), SI unit per s.

    j is the newest good sample at least rate_window_s before sample i (a finite difference over at least
    the window); the slope is unknown (NaN) until the window has filled and at samples that are not finite.
    """

    def __init__(self, rule: AlertRule):
        super().__init__(rule)
        self.history = _History()

    def quantity(self, t_s, values, quality):
        x = values.get(self.rule.signal)
        if x is None:
            return None
        window = self.rule.rate_window_s
        good = np.isfinite(x)
        t_good, x_good = t_s[good], x[good]
        rate_good = np.full(t_good.size, np.nan)
        back = t_good - window
        # the reference sample from this batch where there is one ...
        j = np.searchsorted(t_good, back, side="right") - 1
        inside = j >= 0
        ji = j[inside]
        rate_good[inside] = (x_good[inside] - x_good[ji]) / (t_good[inside] - t_good[ji])
        # ... else from the samples kept from earlier batches
        h_t, h_x = self.history.view()
        if h_t.size and not inside.all():
            outside = np.flatnonzero(~inside)
            k = np.searchsorted(h_t, back[outside], side="right") - 1
            found = k >= 0
            o, kf = outside[found], k[found]
            rate_good[o] = (x_good[o] - h_x[kf]) / (t_good[o] - h_t[kf])
        self.history.append(t_good, x_good, window)
        q = np.full(x.shape, np.nan)
        q[good] = rate_good
        return q


class DisagreeJudge(Judge):
    """disagree: |a - b| (SI unit of the signals), or |a - b| / max(|a|, |b|) (a fraction) when relative."""

    def inputs(self):
        return (self.rule.signal, self.rule.other)  # type: ignore[return-value]

    def quantity(self, t_s, values, quality):
        a, b = values.get(self.rule.signal), values.get(self.rule.other)  # type: ignore[arg-type]
        if a is None or b is None:
            return None
        difference = np.abs(a - b)
        if not self.rule.relative:
            return difference
        with np.errstate(invalid="ignore", divide="ignore"):
            scale = np.maximum(np.abs(a), np.abs(b))
            return np.where(scale > 0.0, difference / scale, np.where(difference == 0.0, 0.0, np.nan))


class StaleJudge(Judge):
    """stale: age of the channel's newest live sample, s (finite and quality 0, or only taring).

    Before the channel's first good sample the age counts from the first moment this judge saw (a sample of
    any channel, or a tick), so a channel that never delivers still goes stale.
    """

    def __init__(self, rule: AlertRule):
        super().__init__(rule)
        self.last_good_s = -math.inf

    def inputs(self):
        return ()

    def quantity(self, t_s, values, quality):
        if self.last_good_s == -math.inf:
            self.last_good_s = float(t_s[0])
        x = values.get(self.rule.signal)
        if x is None:
            return t_s - self.last_good_s
        q = None if quality is None else quality.get(self.rule.signal)
        if q is None:
            good = np.isfinite(x)
        else:  # a taring channel is delivering: alive, though its value is not usable yet
            good = Quality.alive(q) & (np.isfinite(x) | ((q & Quality.TARING) != 0))
        last = np.maximum.accumulate(np.where(good, t_s, -np.inf))
        np.maximum(last, self.last_good_s, out=last)
        self.last_good_s = float(last[-1])
        return t_s - last

    def at_time(self, now_s, last_good_t_s):
        told = last_good_t_s.get(self.rule.signal, -math.inf)
        self.last_good_s = max(self.last_good_s, float(told)) if math.isfinite(told) else self.last_good_s
        if self.last_good_s == -math.inf:
            self.last_good_s = float(now_s)
        return float(now_s) - self.last_good_s


class RangeJudge(Judge):
    """out_of_range: 1 where the channel's quality has the OUT_OF_RANGE bit, 0 where it has not, NaN unknown."""

    def quantity(self, t_s, values, quality):
        q = None if quality is None else quality.get(self.rule.signal)
        if q is None:
            return None
        return ((q & np.uint8(Quality.OUT_OF_RANGE)) != 0).astype(np.float64)


_JUDGES = {"above": LevelJudge, "below": LevelJudge, "rate_above": RateJudge, "rate_below": RateJudge,
           "disagree": DisagreeJudge, "stale": StaleJudge, "out_of_range": RangeJudge}


def judge_for(rule: AlertRule) -> Judge:
    """A new judge for the rule's condition."""
    return _JUDGES[rule.condition](rule)
