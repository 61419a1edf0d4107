"""Every state transition of the alert model: acknowledge, clear, latch, shelve, suppression by design.

The state model follows the general terms of ANSI/ISA-18.2 and IEC 62682 (alarm management), from memory:
normal; active and unacknowledged; active and acknowledged; returned to normal (cleared) but unacknowledged;
shelved (for a time, then judged afresh); suppressed by design. A cleared-unacknowledged alarm whose condition
returns becomes active-unacknowledged again, and a latched alarm stays annunciated after its condition clears
until the operator resets (here: acknowledges) it.
"""

import math

import pytest
from alert_helpers import feed, moves, signals

from monitor.alerts import AlertEngine, AlertRule, AlertState
from monitor.errors import ConfigError

N, AU, AA, CU = "normal", "active_unacknowledged", "active_acknowledged", "cleared_unacknowledged"
SH, SU = "shelved", "suppressed"


def engine(**fields) -> AlertEngine:
    return AlertEngine([AlertRule("p_high", "above", "p", 10.0, **fields)])


def test_before_the_first_sample_every_alert_is_suppressed_by_design():
    e = engine()
    (status,) = e.alerts()
    assert status.state == AlertState.SUPPRESSED and status.since_s is None and math.isnan(status.value)
    assert moves(feed(e, signals([0.0, 1.0], p=[math.nan, 5.0]))) == [(1.0, SU, N, "unsuppressed")]


def test_normal_to_active_unacknowledged_to_acknowledged_to_normal():
    e = engine()
    out = feed(e, signals([0, 1, 2], p=[5, 12, 12]))
    assert moves(out) == [(0.0, SU, N, "unsuppressed"), (1.0, N, AU, "condition_set")]
    assert out[1].value == 12.0 and out[1].threshold == 10.0 and out[1].inputs == (("p", 12.0),)
    assert moves(e.acknowledge("p_high", 2.5)) == [(2.5, AU, AA, "acknowledged")]
    assert e.acknowledge("p_high", 2.6) == []  # nothing left to acknowledge
    assert moves(feed(e, signals([3, 4], p=[12, 5]))) == [(4.0, AA, N, "condition_cleared")]


def test_cleared_unacknowledged_returns_to_normal_on_acknowledge_or_to_active_if_it_comes_back():
    e = engine()
    out = feed(e, signals([0, 1, 2, 3, 4], p=[5, 12, 5, 12, 5]))
    assert moves(out)[1:] == [(1.0, N, AU, "condition_set"), (2.0, AU, CU, "condition_cleared"),
                              (3.0, CU, AU, "condition_set"), (4.0, AU, CU, "condition_cleared")]
    assert e.status("p_high").state == AlertState.CLEARED_UNACKNOWLEDGED
    assert moves(e.acknowledge("p_high", 5.0)) == [(5.0, CU, N, "acknowledged")]


def test_latched_alert_stays_active_until_acknowledged_after_its_condition_clears():
    e = engine(latch=True)
    out = feed(e, signals([0, 1, 2, 3, 4], p=[5, 12, 5, 12, 5]))
    # the state stays active and unacknowledged; the log still learns when the condition went and came back
    assert moves(out)[1:] == [(1.0, N, AU, "condition_set"), (2.0, AU, AU, "condition_cleared"),
                              (3.0, AU, AU, "condition_set"), (4.0, AU, AU, "condition_cleared")]
    assert not e.status("p_high").condition
    assert moves(e.acknowledge("p_high", 5.0)) == [(5.0, AU, N, "acknowledged")]


def test_latched_acknowledged_alert_needs_a_second_acknowledge_once_cleared():
    e = engine(latch=True)
    feed(e, signals([0, 1], p=[5, 12]))
    assert moves(e.acknowledge("p_high", 1.5)) == [(1.5, AU, AA, "acknowledged")]
    assert moves(feed(e, signals([2], p=[5]))) == [(2.0, AA, AA, "condition_cleared")]
    assert e.status("p_high").state == AlertState.ACTIVE_ACKNOWLEDGED
    assert moves(e.acknowledge("p_high", 3.0)) == [(3.0, AA, N, "acknowledged")]


def test_shelved_alert_is_silent_then_judged_afresh_when_its_time_ends():
    e = engine()
    feed(e, signals([0, 1], p=[5, 12]))
    assert moves(e.shelve("p_high", 10.0, 1.5)) == [(1.5, AU, SH, "shelved")]
    assert e.status("p_high").shelved_until_s == 11.5
    assert feed(e, signals([2, 3, 4, 5], p=[5, 12, 5, 12])) == []  # toggling while shelved: no transitions
    out = feed(e, signals([11, 11.5, 12], p=[12, 12, 12]))
    assert moves(out) == [(11.5, SH, AU, "shelving_expired")]  # the first sample at or after the end
    assert e.status("p_high").shelved_until_s is None


def test_shelving_ends_on_tick_without_samples_and_returns_to_normal_when_clear():
    e = engine()
    feed(e, signals([0, 1, 2], p=[5, 12, 5]))
    e.shelve("p_high", 5.0, 2.0)
    assert e.tick(6.9, {}) == []
    assert moves(e.tick(7.0, {})) == [(7.0, SH, N, "shelving_expired")]


def test_unshelve_by_the_operator_judges_the_alert_afresh():
    e = engine()
    feed(e, signals([0, 1], p=[5, 12]))
    e.acknowledge("p_high", 1.2)
    e.shelve("p_high", 100.0, 1.5)
    assert moves(e.unshelve("p_high", 2.0)) == [(2.0, SH, AU, "unshelved")]  # still high: annunciated again
    assert e.unshelve("p_high", 2.5) == []


def test_suppressed_by_design_while_the_valve_is_shut_and_the_on_delay_counts_from_the_opening():
    e = AlertEngine([AlertRule("feed_low", "below", "feed", 5.0, on_delay_s=1.0, only_while="valve")])
    t = [0, 1, 2, 3, 3.5, 4, 5, 6, 7]
    feed_pa = [1, 1, 1, 1, 1, 1, 6, 1, 1]  # low all along but while the valve is shut nobody cares
    valve = [0, 0, 0, 1, 1, 1, 1, 1, 0]
    out = feed(e, signals(t, feed=feed_pa, valve=valve))
    assert moves(out) == [(3.0, SU, N, "unsuppressed"),  # the valve opens at 3 s
                          (4.0, N, AU, "condition_set"),  # 1 s on-delay counted from the opening, not from 0 s
                          (5.0, AU, CU, "condition_cleared"),
                          (7.0, CU, SU, "suppressed")]  # the valve shuts: the rule does not apply any more
    assert e.status("feed_low").state == AlertState.SUPPRESSED


def test_meop_rule_cannot_be_shelved_and_others_need_their_rule_to_allow_it():
    e = AlertEngine([AlertRule("tank_pressure_above_meop", "above", "p", 1.0, severity="critical",
                               shelvable=False, always_on=True),
                     AlertRule("quiet", "above", "p", 1.0, shelvable=False)])
    with pytest.raises(ConfigError, match="always on"):
        e.shelve("tank_pressure_above_meop", 60.0, 0.0)
    with pytest.raises(ConfigError, match="shelvable = false"):
        e.shelve("quiet", 60.0, 0.0)
    with pytest.raises(ConfigError, match="always_on"):  # an always-on rule cannot even be built shelvable
        AlertRule("x", "above", "p", 1.0, always_on=True)


def test_operator_mistakes_name_what_is_wrong():
    e = engine()
    with pytest.raises(ConfigError, match="'nope'"):
        e.acknowledge("nope", 0.0)
    with pytest.raises(ConfigError, match="shelve duration_s"):
        e.shelve("p_high", 0.0, 0.0)
    with pytest.raises(ConfigError, match="shelve duration_s"):
        e.shelve("p_high", math.inf, 0.0)


def test_top_severity_unacknowledged_and_the_order_of_the_list():
    e = AlertEngine([AlertRule("warn", "above", "p", 1.0), AlertRule("crit", "above", "p", 2.0, severity="critical"),
                     AlertRule("info", "above", "p", 0.5, severity="advisory")])
    feed(e, signals([0, 1, 2], p=[0, 0.8, 3]))
    assert e.unacknowledged_top_severity()
    assert [a.name for a in e.alerts()] == ["crit", "warn", "info"]
    e.acknowledge_all(3.0)
    assert not e.unacknowledged_top_severity()
    assert {a.state for a in e.alerts()} == {AlertState.ACTIVE_ACKNOWLEDGED}
    feed(e, signals([4], p=[0]))
    assert {a.name: a.state.value for a in e.alerts()} == {"crit": N, "warn": N, "info": N}
