"""Invariants of the alert engine, with hypothesis: no chatter inside the deadband, any batch cut gives the same
transitions, and the run-log text of a transition reads back exactly."""

import math

import numpy as np
from alert_helpers import activations, as_logged, feed, signals
from hypothesis import given, settings
from hypothesis import strategies as st

from monitor.alerts import CAUSES, SEVERITIES, AlertEngine, AlertRule, AlertState, AlertTransition
from monitor.signals import Signals

delays = st.sampled_from([0.0, 0.05, 0.2, 1.0])


@settings(max_examples=150, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), fraction=st.floats(0.01, 0.999), deadband=st.floats(0.01, 100.0),
       rising=st.booleans(), on_delay=delays, off_delay=delays, batch=st.integers(1, 400))
def test_noise_inside_the_deadband_activates_an_alert_at_most_once(seed, fraction, deadband, rising, on_delay,
                                                                   off_delay, batch):
    # Noise of amplitude a < deadband about the threshold crosses the threshold again and again but can never
    # reach the clear level (threshold -/+ deadband): the ANSI/ISA-18.2 deadband (from memory) allows one
    # activation per excursion beyond it, so at most one here.
    rng = np.random.default_rng(seed)
    threshold, amplitude = 50.0, fraction * deadband
    t = np.arange(1000) * 0.01
    x = threshold + rng.uniform(-amplitude, amplitude, t.size)
    rule = AlertRule("x_alert", "above" if rising else "below", "x", threshold, deadband=deadband,
                     on_delay_s=on_delay, off_delay_s=off_delay)
    out = feed(AlertEngine([rule]), signals(t, x=x), batch=batch)
    assert activations(out) <= 1
    assert not any(tr.cause == "condition_cleared" for tr in out)


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), cuts=st.lists(st.integers(1, 299), max_size=12, unique=True),
       on_delay=delays, off_delay=delays, window=st.sampled_from([0.05, 0.3, 1.0]))
def test_any_cut_into_batches_gives_the_same_transitions(seed, cuts, on_delay, off_delay, window):
    rng = np.random.default_rng(seed)
    n = 300
    t = np.cumsum(rng.uniform(0.005, 0.05, n))
    x = np.cumsum(rng.normal(0.0, 1.0, n))
    x[rng.random(n) < 0.1] = np.nan
    y = x + rng.normal(0.0, 0.5, n)
    gate = (rng.random(n) < 0.8).astype(float)
    rules = [AlertRule("lvl", "above", "x", 0.0, deadband=1.0, on_delay_s=on_delay, off_delay_s=off_delay),
             AlertRule("rate", "rate_above", "x", 5.0, deadband=2.0, rate_window_s=window, on_delay_s=on_delay),
             AlertRule("dis", "disagree", "x", 0.6, other="y", deadband=0.2, off_delay_s=off_delay),
             AlertRule("old", "stale", "x", 0.08, off_delay_s=off_delay),
             AlertRule("gated", "below", "y", 0.0, only_while="g", on_delay_s=on_delay, latch=True)]
    s = Signals(t, {"x": x, "y": y, "g": gate})
    whole = as_logged(AlertEngine(rules).update(s))
    e = AlertEngine(rules)
    pieces = []
    for lo, hi in zip([0] + sorted(cuts), sorted(cuts) + [n]):
        pieces += e.update(Signals(t[lo:hi], {k: v[lo:hi] for k, v in s.values.items()}))
    assert as_logged(pieces) == whole


finite = st.floats(allow_nan=False, allow_infinity=False)
names = st.from_regex(r"[a-z][a-z0-9_]{0,20}", fullmatch=True)


@given(t=finite, rule=names, a=st.sampled_from(list(AlertState)), b=st.sampled_from(list(AlertState)),
       severity=st.sampled_from(SEVERITIES), cause=st.sampled_from(CAUSES),
       value=st.floats(allow_infinity=True, allow_nan=True), threshold=finite,
       unit=st.sampled_from(["", "Pa", "Pa/s", "kg", "m/s", "1", "s"]),
       inputs=st.lists(st.tuples(names, st.floats()), max_size=3))
def test_log_text_reads_back_exactly(t, rule, a, b, severity, cause, value, threshold, unit, inputs):
    tr = AlertTransition(t, rule, a, b, severity, cause, value, threshold, unit, tuple(inputs))
    back = AlertTransition.from_log(t, tr.log_text())
    assert back.log_text() == tr.log_text()
    assert (back.rule, back.from_state, back.to_state, back.severity, back.cause, back.unit) == \
        (rule, a, b, severity, cause, unit)
    assert back.value == value or (math.isnan(back.value) and math.isnan(value))
    assert back.threshold == threshold
