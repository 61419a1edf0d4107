"""The view model and the layout without a screen: formats, units, the caution line's energy, glyphs, bars, keys."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from ui_helpers import advance, sim_session

from monitor.calibration import parse_channels
from monitor.config import load_rig
from monitor.rigs import resolve_rig
from monitor.ui import glyphs, layout
from monitor.ui.display import DisplayUnits, decimals_for, number, run_time, short_unit, shown
from monitor.ui.keys import KEYS, REPLAY, key_bar_items
from monitor.ui.screens.main import MonitorScreen
from monitor.ui.view import WINDOWS_S, build_view, caution_texts, next_window


@pytest.fixture(scope="module")
def bench():
    rig = load_rig(resolve_rig("bench_nitrogen_1l"))
    return rig, DisplayUnits(rig, parse_channels(rig))


@pytest.fixture(scope="module")
def demo_view():
    session, clock = sim_session()
    advance(session, clock, 22.0)
    app_units = DisplayUnits(session.rig, session.engine.channels, session.engine.alerts.rules)
    return session, app_units, build_view(session.snapshot(), app_units)


def test_caution_line_states_meop_and_brode_energy_at_fill(bench):
    rig, units = bench
    # Brode (1959): E = (p - pa) V / (gamma - 1). Nitrogen's ideal-gas cp at 298.15 K is 29.124 J/(mol K)
    # (NIST-JANAF tables, from memory), R = 8.314462618 J/(mol K): gamma = 29.124 / (29.124 - R) = 1.3995.
    gamma = 29.124 / (29.124 - 8.314462618)
    energy_j = (200e5) * 1.0e-3 / (gamma - 1.0)  # 200 bar gauge fill: p - pa = 200 bar, 1 L
    tnt_g = energy_j / 4.184e6 * 1e3  # 1 kg TNT = 4.184 MJ by convention
    texts = caution_texts(rig, math.nan, units)  # no tank reading yet: the fill pressure
    assert f"{energy_j / 1e3:.1f} kJ" == "50.1 kJ"
    assert "MEOP 230.0 bar g" in texts[0] and "tank 200.0 bar g at fill" in texts[0]
    assert f"stored {energy_j / 1e3:.1f} kJ ≈ {tnt_g:.1f} g TNT (Brode)" in texts[0]
    assert all("interlock" in t and "MEOP 230.0 bar g" in t for t in texts)
    assert len(texts[2]) < 80 and len(texts[-1]) < 64  # the 80-column form and the last resort


def test_channels_keep_the_rig_files_units_and_estimates_have_ours(bench):
    rig, units = bench
    tank = units.signal("tank_pressure")
    assert tank.symbol == "bar g"
    # 230 bar gauge = 230e5 Pa + 101325 Pa ambient (absolute, SI) -> 230.0 bar g on screen
    assert tank(230e5 + 101325.0) == pytest.approx(230.0)
    assert shown(0.2, units.signal("propellant_pvt_gauge_kg")) == "200.0 g"
    assert shown(1.5e-3, units.signal("mass_flow_filtered_kg_s")) == "1.500 g/s"
    assert units.signal("regulator_headroom_pa").symbol == "bar"  # a difference: no gauge offset
    assert units.signal("regulator_headroom_pa")(5e5) == pytest.approx(5.0)
    big = dataclasses.replace(rig, tank=dataclasses.replace(rig.tank, volume_m3=0.050))
    assert DisplayUnits(big, parse_channels(rig)).by_kind["mass"].symbol == "kg"
    assert short_unit("kPa abs") == "kPa a" and short_unit("SLPM") == "SLPM"


@pytest.mark.parametrize("value, text", [(0.51234, "0.512"), (12.3456, "12.35"), (123.456, "123.5"),
                                         (1234.56, "1235"), (-0.0001, "0.000"), (math.nan, "--"), (math.inf, "--")])
def test_numbers_have_about_four_significant_digits(value, text):
    assert number(value) == text


def test_run_time_format():
    assert run_time(12.34) == "12.3 s"
    assert run_time(754.0) == "12:34"
    assert run_time(3723.0) == "1:02:03"
    assert run_time(None) == "--"


@given(st.floats(min_value=-1e6, max_value=1e6, allow_nan=False))
def test_decimals_never_exceed_three_and_shrink_as_values_grow(value):
    d = decimals_for(value)
    assert 0 <= d <= 3
    assert decimals_for(value * 10.0) <= d


def test_the_big_numbers_carry_the_engines_values_and_two_sigma(demo_view):
    session, units, view = demo_view
    e = session.snapshot().engine.estimates
    thrust = next(t for t in view.tiles if t.key == "thrust")
    assert thrust.value == f"{e.thrust_estimated_n:.3f}"
    # ± is the coverage interval with k = 2 (GUM, JCGM 100:2008, 6.2-6.3, from memory)
    assert thrust.plus_minus == f"±{2.0 * e.thrust_estimated_n_std:.3f} N (2σ)"
    delta_v = next(t for t in view.tiles if t.key == "delta_v")
    assert delta_v.details[0] == f"≥ {number(e.delta_v_left_conservative_m_s)} m/s (-2σ)"
    assert [t.key for t in view.tiles] == ["thrust", "propellant", "delta_v", "time_left"]
    assert {r.name for r in view.alerts} >= {"leak_suspected", "mass_flow_stale"}
    assert view.link.stale == ("mass_flow",)  # the dropout from 20 s to 24 s


def test_a_hover_platform_shows_hover_endurance():
    text = resolve_rig("hover_air_3l").read_text(encoding="utf-8")
    from monitor.demo_logs import with_sample_rate

    session, clock = sim_session(with_sample_rate(text, "200 Hz"), scenario=None)
    advance(session, clock, 3.0)
    units = DisplayUnits(session.rig, session.engine.channels, session.engine.alerts.rules)
    view = build_view(session.snapshot(), units)
    assert [t.key for t in view.tiles] == ["thrust", "propellant", "hover", "time_left"]
    assert view.tiles[2].label == "HOVER LEFT" and view.tiles[2].unit == "s"


def test_alert_rows_show_severity_in_marks_and_words(demo_view):
    _, _, view = demo_view
    for row in view.alerts:
        marks = row.marks.count("▲")
        assert (row.level, marks, row.severity.strip()) in {("critical", 3, "CRIT"), ("warning", 2, "WARN"),
                                                             ("advisory", 1, "ADV")}
    assert sum(r.selected for r in view.alerts) == 1


@given(st.text(alphabet="0123456789.-:%+ ", min_size=1, max_size=9))
def test_glyph_rows_are_as_wide_as_width_says(text):
    for size, draw, rows in (("small", glyphs.small, 3), ("large", glyphs.large, 5)):
        drawn = draw(text)
        assert len(drawn) == rows
        assert {len(r) for r in drawn} == {glyphs.width(text, size)}


def test_small_glyphs_draw_an_eight():
    assert glyphs.small("8") == ["█▀█", "█▀█", "▀▀▀"]
    assert glyphs.large("1")[0] == "  ██  "


def test_bars_keep_the_order_of_the_values_and_leave_gaps_for_missing_data():
    t = np.arange(10.0)
    rows = layout.spark_rows(t, t * 3.0, 9.0, 10.0, 10)
    assert rows == ["▁▂▃▃▄▅▆▆▇█"]
    gap = layout.spark_rows(t, np.where(t == 4, np.nan, t), 9.0, 10.0, 10)[0]
    assert gap[4] == " " and gap[3] != " "
    flat = layout.spark_rows(t, np.full(10, 7.0), 9.0, 10.0, 10)[0]  # a flat trend sits at mid-height
    assert len(set(flat)) == 1 and layout.BARS.index(flat[0]) in (4, 5)
    assert layout.spark_rows(t, t, 9.0, 20.0, 10)[0][:5] == "     "  # the window's first half has no data


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-1e3, 1e3), min_size=2, max_size=60), st.integers(1, 3), st.integers(5, 40))
def test_taller_bars_for_larger_values_in_every_row_count(values, rows, columns):
    v = np.array(values)
    t = np.arange(v.size, dtype=float)
    drawn = layout.spark_rows(t, v, t[-1], float(v.size), columns, rows)
    assert len(drawn) == rows and all(len(r) == columns for r in drawn)
    heights = [sum(layout.BARS.index(r[c]) for r in drawn) for c in range(columns)]
    shown_values = [v[int(np.searchsorted(t, t[-1] - v.size + v.size * (c + 1) / columns, side="right")) - 1]
                    for c in range(columns)]
    pairs = [(h, x) for h, x, c in zip(heights, shown_values, range(columns)) if h]
    for (h1, x1), (h2, x2) in zip(sorted(pairs, key=lambda p: p[1]), sorted(pairs, key=lambda p: p[1])[1:]):
        assert h1 <= h2 or math.isclose(x1, x2)


@settings(max_examples=30, deadline=None)
@given(st.integers(80, 220), st.integers(5, 12))
def test_every_laid_out_line_is_exactly_as_wide_as_its_block(demo_view, width, height):
    _, _, view = demo_view
    blocks = [layout.tile_lines(view.tiles, width, height), layout.trend_lines(view.trends, 30.0, width // 2, height),
              layout.alert_lines(view, width // 2, height), layout.link_lines(view.link, width, height),
              layout.link_lines(view.link, width, 1), [layout.header_line(view, width)], [layout.caution_line(view, width)]]
    for lines, w in zip(blocks, [width, width // 2, width // 2, width, width, width, width]):
        assert all(len(layout.plain(line)) == w for line in lines)


def test_window_steps_stay_within_the_offered_windows():
    assert next_window(30.0, 1) == 60.0
    assert next_window(WINDOWS_S[-1], 1) == WINDOWS_S[-1]
    assert next_window(WINDOWS_S[0], -1) == WINDOWS_S[0]


def test_every_key_has_a_binding_and_an_action():
    bound = {b.key: b.action for b in MonitorScreen.BINDINGS}
    for key in KEYS:
        for name in key.keys:
            assert bound[name] == key.action
        assert hasattr(MonitorScreen, "action_" + key.action.split("(")[0])
    replay_bar = key_bar_items("replay")
    assert [word for _, word in replay_bar][:6] == ["quit", "help", "pause", "step", "speed", "seek"]
    assert all(word not in {"pause", "step", "speed", "seek"} for _, word in key_bar_items("live"))
    assert all(k.modes == REPLAY for k in KEYS if k.short in {"pause", "step", "speed", "seek"})


def test_a_latched_meop_alarm_says_its_condition_has_gone():
    from ui_helpers import meop_rig_text

    session, clock = sim_session(meop_rig_text(), scenario=None)
    advance(session, clock, 22.0)  # the pulses and the burn have brought the reading under the 230 bar g MEOP
    units = DisplayUnits(session.rig, session.engine.channels, session.engine.alerts.rules)
    view = build_view(session.snapshot(), units)
    assert view.banner is not None and view.banner.name == "tank_pressure_above_meop"
    assert "ACTIVE (latched: the condition has gone)" in view.banner.facts
    value = float(view.banner.facts.split("value ")[1].split(" bar g")[0])
    assert value < 230.0
