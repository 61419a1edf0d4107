"""The alert engine over samples: deadband, on/off delays in sample time, batch-size independence, each condition.

Deadband and delays are checked against their general definitions in ANSI/ISA-18.2 / IEC 62682 (from memory):
an alarm clears only once the value is back past the setpoint by the deadband; an on-delay (off-delay) asks the
alarm (normal) condition to persist for that time before the state changes. Sample times are multiples of 1/4 s
so that every sum of times below is exact in binary floating point.
"""

import math

import numpy as np
import pytest
from alert_helpers import activations, as_logged, feed, moves, signals

from monitor.alerts import AlertEngine, AlertRule, AlertTransition, write_transitions
from monitor.clock import FakeClock
from monitor.errors import MonitorError
from monitor.recorder import ChannelColumn, RunLog, RunLogWriter
from monitor.samples import Quality
from monitor.signals import Signals

N, AU, CU = "normal", "active_unacknowledged", "cleared_unacknowledged"


def changes(transitions):
    """(t_s, to) of the condition-driven transitions."""
    return [(t, to) for t, _, to, cause in moves(transitions) if cause.startswith("condition")]


def test_deadband_above_sets_at_the_threshold_and_clears_only_below_threshold_minus_deadband():
    e = AlertEngine([AlertRule("p_high", "above", "p", 10.0, deadband=2.0)])
    p = [9.0, 10.0, 11.0, 9.0, 8.5, 8.0, 7.9, 9.0, 10.1]
    out = feed(e, signals(range(len(p)), p=p))
    # 10.0 is not above 10; 8.0 is not below 10 - 2; 7.9 is
    assert changes(out) == [(2.0, AU), (6.0, CU), (8.0, AU)]


def test_deadband_below_mirrors_above():
    e = AlertEngine([AlertRule("p_low", "below", "p", 10.0, deadband=2.0)])
    p = [11.0, 9.9, 11.9, 12.0, 12.1, 9.0]
    assert changes(feed(e, signals(range(len(p)), p=p))) == [(1.0, AU), (4.0, CU), (5.0, AU)]


def test_nan_samples_hold_the_condition():
    e = AlertEngine([AlertRule("p_high", "above", "p", 10.0)])
    out = feed(e, signals(range(6), p=[5, 12, math.nan, math.nan, 12, 5]))
    assert changes(out) == [(1.0, AU), (5.0, CU)]


def test_on_delay_and_off_delay_count_in_sample_time():
    t = np.arange(0, 10.25, 0.25)
    p = np.where((t >= 2.0) & (t < 5.0), 12.0, 5.0)
    p[(t >= 3.5) & (t < 3.75)] = 5.0  # a 0.25 s dip, shorter than the off-delay
    p[(t >= 7.0) & (t < 7.75)] = 12.0  # a 0.75 s blip, shorter than the on-delay
    e = AlertEngine([AlertRule("p_high", "above", "p", 10.0, on_delay_s=1.0, off_delay_s=0.5)])
    # set from 2.0 s; on-delay 1 s -> 3.0 s. The dip does not clear. Clear from 5.0 s; off-delay 0.5 s -> 5.5 s.
    assert changes(feed(e, signals(t, p=p))) == [(3.0, AU), (5.5, CU)]


@pytest.mark.parametrize("batch", [1, 2, 3, 7])
def test_delays_span_batches(batch):
    t = np.arange(0, 10.25, 0.25)
    p = np.where((t >= 2.0) & (t < 5.0), 12.0, 5.0)
    e = AlertEngine([AlertRule("p_high", "above", "p", 10.0, on_delay_s=1.0, off_delay_s=0.5)])
    assert changes(feed(e, signals(t, p=p), batch=batch)) == [(3.0, AU), (5.5, CU)]


def test_a_delay_expires_on_tick_when_no_samples_arrive():
    e = AlertEngine([AlertRule("p_high", "above", "p", 10.0, on_delay_s=1.0)])
    feed(e, signals([0.0, 1.0, 2.0, 2.5], p=[5, 5, 12, 12]))
    assert e.tick(2.75, {}) == []
    out = e.tick(3.25, {})
    assert moves(out) == [(3.25, N, AU, "condition_set")]  # judged at the tick that found it due


def rich_rules() -> list[AlertRule]:
    return [
        AlertRule("p_high", "above", "p", 10.0, deadband=1.0, on_delay_s=0.5, off_delay_s=0.25, latch=True),
        AlertRule("p_low", "below", "p", 3.0, deadband=0.5, on_delay_s=0.25),
        AlertRule("p_falling", "rate_below", "p", -4.0, deadband=1.0, rate_window_s=0.75),
        AlertRule("gauges", "disagree", "a", 0.1, other="b", relative=True, deadband=0.02, off_delay_s=0.5),
        AlertRule("p_stale", "stale", "p", 0.6),
        AlertRule("p_range", "out_of_range", "p", 0.5),
        AlertRule("flow_low_open", "below", "flow", 1.0, only_while="valve", on_delay_s=0.5),
    ]


def rich_signals(n: int = 600, seed: int = 3) -> tuple[Signals, dict]:
    rng = np.random.default_rng(seed)
    t = np.arange(n) * 0.05
    p = 7.0 + 5.0 * np.sin(t / 2.0) + rng.normal(0.0, 0.6, n)
    p[rng.random(n) < 0.05] = np.nan
    p[200:230] = np.nan  # a 1.5 s gap: stale
    q = np.where(np.isnan(p), np.uint8(Quality.MISSING), np.uint8(0))
    bad = rng.random(n) < 0.02
    q[bad] = Quality.OUT_OF_RANGE
    p[bad] = np.nan
    a = 1.0 + 0.1 * rng.normal(size=n)
    b = np.ones(n)
    valve = ((t % 6.0) < 2.5).astype(float)
    flow = np.where(valve > 0.5, 1.5, 0.0) + rng.normal(0.0, 0.4, n)
    return Signals(t, {"p": p, "a": a, "b": b, "valve": valve, "flow": flow}), {"p": q}


def test_the_same_signals_in_batches_of_1_13_or_all_at_once_give_identical_transitions():
    s, q = rich_signals()
    runs = []
    for batch in (None, 1, 13):
        runs.append(as_logged(feed(AlertEngine(rich_rules()), s, q, batch)))
    assert len(runs[0]) > 30  # the case is rich enough to mean something
    assert {tr.split()[0] for _, tr in runs[0]} == {f"rule={r.name}" for r in rich_rules()}
    assert runs[1] == runs[0] and runs[2] == runs[0]


def test_deterministic_with_ticks_and_operator_actions():
    def run():
        e = AlertEngine(rich_rules())
        s, q = rich_signals()
        out = feed(e, s, q, batch=50)
        out += e.tick(40.0, {"p": 29.0}) + e.acknowledge_all(40.5) + e.shelve("p_low", 3.0, 41.0) + e.tick(45.0, {})
        return as_logged(out), [(a.name, a.state, a.since_s) for a in e.alerts()]
    assert run() == run()


def test_rate_of_change_against_a_hand_computed_slope():
    # Tank pressure, bar -> Pa, every 0.5 s; one sample lost at 2.0 s.
    t = [0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0, 3.5]
    p_bar = [200.0, 199.0, 198.0, 196.0, math.nan, 184.0, 176.0, 168.0]
    e = AlertEngine([AlertRule("falling", "rate_below", "p", -10e5, rate_window_s=1.0, unit="Pa/s")])
    out = feed(e, signals(t, p=np.array(p_bar) * 1e5))
    # Slope at 2.5 s over the newest good sample at least 1 s before (1.5 s):
    # hand computation: (184 - 196) bar / (2.5 - 1.5) s = -12 bar/s = -12e5 Pa/s < -10e5 Pa/s.
    # Before that: 1.0 s: (198 - 200)/1 = -2; 1.5 s: (196 - 199)/1 = -3 bar/s; nothing below -10.
    assert moves(out) == [(1.0, "suppressed", N, "unsuppressed"), (2.5, N, AU, "condition_set")]
    assert out[1].value == pytest.approx(-12e5, rel=1e-12)
    # At 3.0 s the reference is 2.0 s, which was lost, so 1.5 s: (176 - 196)/(3.0 - 1.5) = -13.33 bar/s
    assert e.status("falling").value == pytest.approx((168e5 - 184e5) / (3.5 - 2.5), rel=1e-12)  # last: 3.5 s


def test_rate_window_reaches_back_across_batches():
    t = np.arange(0, 5.0, 0.25)
    p = 100.0 - 3.0 * t**2  # slope over [t - 1, t]: -3 (2t - 1)
    e1 = AlertEngine([AlertRule("falling", "rate_below", "p", -10.0, rate_window_s=1.0)])
    e2 = AlertEngine([AlertRule("falling", "rate_below", "p", -10.0, rate_window_s=1.0)])
    whole, single = feed(e1, signals(t, p=p)), feed(e2, signals(t, p=p), batch=1)
    # hand computation: -3 (2t - 1) < -10 first for t > 13/6 = 2.1667 s: the sample at 2.25 s
    assert changes(whole) == [(2.25, AU)] and as_logged(single) == as_logged(whole)
    assert whole[-1].value == pytest.approx(-3.0 * (2 * 2.25 - 1.0), rel=1e-12)


def test_disagreement_absolute_and_relative():
    e = AlertEngine([AlertRule("abs", "disagree", "a", 0.02, other="b", deadband=0.005),
                     AlertRule("rel", "disagree", "a", 0.05, other="b", relative=True, deadband=0.01)])
    a = [1.00, 1.00, 1.00, 1.00, 1.00]
    b = [1.00, 0.97, 0.984, 0.99, 0.94]
    out = feed(e, signals(range(5), a=a, b=b))
    # abs: |1 - 0.97| = 0.03 > 0.02 sets; 0.016 is not below 0.02 - 0.005; 0.01 is; 0.06 sets again
    assert changes([tr for tr in out if tr.rule == "abs"]) == [(1.0, AU), (3.0, CU), (4.0, AU)]
    # rel: 0.03/1, 0.016/1, 0.01/1 never above 5 %; 0.06/1 = 6 % is
    assert changes([tr for tr in out if tr.rule == "rel"]) == [(4.0, AU)]
    assert out[-1].inputs == (("a", 1.0), ("b", 0.94))
    assert out[-1].value == pytest.approx(0.06 / 1.0, rel=1e-12)


def test_stale_channel_by_tick_when_nothing_arrives():
    e = AlertEngine([AlertRule("p_stale", "stale", "p", 0.5)])
    feed(e, signals(np.arange(0, 1.25, 0.25), p=np.ones(5)))  # good up to 1.0 s
    assert e.tick(1.5, {}) == []  # age 0.5 s is not more than 0.5 s
    out = e.tick(1.75, {})
    assert moves(out) == [(1.75, N, AU, "condition_set")] and out[0].value == 0.75
    assert changes(feed(e, signals([2.0], p=[1.0]))) == [(2.0, CU)]


def test_stale_uses_the_newest_good_time_link_health_reports():
    e = AlertEngine([AlertRule("p_stale", "stale", "p", 0.5)])
    feed(e, signals([0.0, 0.25], p=[1.0, 1.0]))
    assert e.tick(2.0, {"p": 1.75}) == []  # health saw a good sample at 1.75 s: age 0.25 s
    assert changes(e.tick(2.5, {"p": 1.75})) == [(2.5, AU)]


def test_stale_within_a_batch_and_before_the_first_good_sample():
    e = AlertEngine([AlertRule("p_stale", "stale", "p", 0.5), AlertRule("f_stale", "stale", "f", 0.5)])
    t = np.arange(0, 2.0, 0.25)
    p = np.where((t >= 0.5) & (t < 1.5), np.nan, 1.0)  # good at 0.25 s, then nothing until 1.5 s
    out = feed(e, signals(t, p=p, f=np.full(t.size, np.nan)), quality={"p": np.zeros(t.size, np.uint8)})
    assert changes([tr for tr in out if tr.rule == "p_stale"]) == [(1.0, AU), (1.5, CU)]
    # f never had a good sample: its age counts from the first sample the engine saw (0 s)
    assert changes([tr for tr in out if tr.rule == "f_stale"]) == [(0.75, AU)]


def test_a_sample_flagged_bad_by_quality_is_not_good_for_staleness():
    e = AlertEngine([AlertRule("p_stale", "stale", "p", 0.5)])
    t = np.arange(0, 2.0, 0.25)
    q = np.where(t >= 0.5, np.uint8(Quality.OUT_OF_RANGE), np.uint8(0))
    assert changes(feed(e, signals(t, p=np.ones(t.size)), {"p": q})) == [(1.0, AU)]


def test_out_of_range_follows_the_quality_bit():
    e = AlertEngine([AlertRule("p_range", "out_of_range", "p", 0.5)])
    q = np.array([0, 4, 4 | 1, 0, 2, 4], dtype=np.uint8)
    out = feed(e, signals(range(6), p=[1, np.nan, np.nan, 1, np.nan, np.nan]), {"p": q})
    assert changes(out) == [(1.0, AU), (3.0, CU), (5.0, AU)]
    assert feed(AlertEngine([AlertRule("p_range", "out_of_range", "p", 0.5)]), signals([0], p=[1])) == []


def test_signals_of_the_wrong_length_are_refused():
    e = AlertEngine([AlertRule("p_high", "above", "p", 10.0)])
    with pytest.raises(MonitorError, match="'p'"):
        e.update(Signals(np.arange(3.0), {"p": np.ones(2)}))


def test_log_text_round_trips_and_reaches_the_run_log(tmp_path):
    e = AlertEngine([AlertRule("tank_high", "above", "tank_pressure", 2.3e7, severity="critical", unit="Pa"),
                     AlertRule("gauges", "disagree", "a", 0.05, other="b", relative=True, unit="1")])
    out = feed(e, signals([0.0, 0.5], tank_pressure=[2.0e7, 2.4e7], a=[1.0, 1.0], b=[1.0, 0.9]))
    out += e.acknowledge("tank_high", 0.75)
    text = out[2].log_text()
    assert text.startswith("rule=tank_high from=normal to=active_unacknowledged severity=critical "
                           "cause=condition_set value=24000000.0 threshold=23000000.0 unit=Pa")
    with RunLogWriter(tmp_path / "run.ejlog", "", [ChannelColumn("tank_pressure", "pressure")], FakeClock(),
                      unknown_start=True) as writer:
        write_transitions(writer, out)
    notes = RunLog.open(tmp_path / "run.ejlog").alerts()
    back = [AlertTransition.from_log(n.t_s, n.text) for n in notes]
    assert [n.label for n in notes] == [tr.to_state.value for tr in out]
    assert as_logged(back) == as_logged(out)
    with pytest.raises(ValueError):
        AlertTransition.from_log(0.0, "rule=x from=normal")


def test_no_chatter_deterministic_case():
    # A triangle wave about the threshold, starting at its bottom, 5 periods of 2 s: it rises through the
    # threshold 5 times. With peak 0.9 deadband it never reaches the clear level: one activation. With peak
    # 1.5 deadband it passes both levels each period: one activation per period, 5. Without a deadband the
    # same 0.9 wave would raise the alert at every crossing, which is the chatter the deadband prevents.
    t = np.arange(0, 10.0, 0.01)
    tri = 1.0 - 2.0 * np.abs(2.0 * ((t / 2.0) % 1.0) - 1.0)  # -1 .. 1, period 2 s
    for peak, deadband, expected in ((0.9, 1.0, 1), (1.5, 1.0, 5), (0.9, 0.0, 5)):
        p = 10.0 + peak * tri
        assert int(np.sum(np.diff((p > 10.0).astype(int)) == 1)) == 5  # upward crossings of the threshold
        e = AlertEngine([AlertRule("p_high", "above", "p", 10.0, deadband=deadband)])
        assert activations(feed(e, signals(t, p=p))) == expected
