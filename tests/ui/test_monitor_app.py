"""The monitor app headless (App.run_test and the pilot): numbers on screen, alert keys, the takeover, quitting."""

from __future__ import annotations

import math

import pytest
from ui_helpers import advance, meop_rig_text, region_text, screen_text, sim_session

from monitor.alerts import MEOP_RULE, AlertState
from monitor.recorder import RunLog
from monitor.ui import MonitorApp
from monitor.ui.keys import KEYS, SHELVE_S
from monitor.ui.layout import plain
from monitor.ui.screens import ConfirmQuitScreen, HelpScreen, LinkScreen
from monitor.ui.view import build_view
from monitor.ui.widgets import TextBlock

SIZE = (80, 24)
WIDE = (200, 50)


def _status(session, name):
    return next(a for a in session.snapshot().engine.alerts if a.name == name)


async def _show(app, pilot) -> None:
    """Take the newest snapshot now and let textual draw it."""
    app.refresh_view()
    await pilot.pause()


@pytest.fixture(scope="module")
def demo_at_22s():
    """The demo scenario 22 s in: pulses done, the burn on, the leak flagged, the flow meter sending nan."""
    session, clock = sim_session()
    advance(session, clock, 22.0)
    return session, clock


@pytest.mark.parametrize("size", [SIZE, WIDE])
async def test_every_block_on_screen_is_the_view_models_text(demo_at_22s, size):
    session, _ = demo_at_22s
    app = MonitorApp(session)
    async with app.run_test(size=size) as pilot:
        await _show(app, pilot)
        screen = screen_text(app)
        view = build_view(session.snapshot(), app.units, app.settings, app.replay_path)
        assert view == app.view
        for block in app.monitor.query(TextBlock):
            if not block.display or block.size.height == 0:
                continue
            expected = [plain(line) for line in block.lay(block.model, block.size.width, block.size.height)]
            got = region_text(screen, block.region)[: len(expected)]
            assert got == expected, block.id


async def test_the_big_numbers_are_the_engines_estimates(demo_at_22s):
    session, _ = demo_at_22s
    app = MonitorApp(session)
    async with app.run_test(size=SIZE) as pilot:
        await _show(app, pilot)
        e = session.snapshot().engine.estimates
        tiles = {t.key: t for t in app.view.tiles}
        # Formats: four significant digits (3 decimals below 10, 2 below 100, 1 below 1000); ± is 2 standard
        # uncertainties (coverage factor k = 2, GUM JCGM 100:2008 section 6.3, from memory), same decimals.
        assert 0.1 < e.thrust_estimated_n < 10.0  # the burn is on: three decimals, in N
        assert tiles["thrust"].value == f"{e.thrust_estimated_n:.3f}"
        assert tiles["thrust"].plus_minus == f"±{2 * e.thrust_estimated_n_std:.3f} N (2σ)"
        assert tiles["thrust"].details[0] == f"cell {e.thrust_measured_n:.3f} ±{2 * e.thrust_measured_n_std:.3f}"
        assert tiles["propellant"].value == f"{e.usable_propellant_percent:.1f}"
        assert tiles["propellant"].plus_minus == f"±{2 * e.usable_propellant_percent_std:.1f} % (2σ)"
        grams = 1000.0 * e.usable_propellant_kg  # a 1 L bottle: grams
        assert tiles["propellant"].details[0].startswith(f"{grams:.1f} ±")
        assert tiles["delta_v"].value == f"{e.delta_v_left_m_s:.{2 if e.delta_v_left_m_s < 100 else 1}f}"
        assert tiles["time_left"].unit == "s"
        screen = screen_text(app)
        assert "±" in screen and "(2σ)" in screen  # the screen says which uncertainty it shows
        assert f"{tiles['thrust'].plus_minus}" in screen
        assert tiles["propellant"].details[0] in screen
        assert "CAUTION MEOP 230.0 bar g" in screen  # the rig's own display unit, bar gauge


async def test_acknowledge_select_shelve_and_unshelve_keys_change_the_engines_alerts():
    session, clock = sim_session()
    advance(session, clock, 22.0)
    app = MonitorApp(session)
    async with app.run_test(size=SIZE) as pilot:
        await _show(app, pilot)
        listed = [r.name for r in app.view.alerts]
        assert {"leak_suspected", "mass_flow_stale"} <= set(listed)
        assert app.settings.selected == listed[0]
        first = listed[0]
        assert _status(session, first).state == AlertState.ACTIVE_UNACKNOWLEDGED
        await pilot.press("a")
        advance(session, clock, 0.05)  # the worker carries the queued action out
        assert _status(session, first).state in (AlertState.ACTIVE_ACKNOWLEDGED, AlertState.NORMAL)

        await _show(app, pilot)
        await pilot.press("down")
        second = app.settings.selected
        assert second == [r.name for r in app.view.alerts][1]
        assert f">{app.view.alerts[1].marks}" in screen_text(app)
        await pilot.press("s")
        advance(session, clock, 0.05)
        shelved = _status(session, second)
        assert shelved.state == AlertState.SHELVED
        assert shelved.shelved_until_s == pytest.approx(session.snapshot().t_s - 0.05 + SHELVE_S, abs=0.06)
        await _show(app, pilot)
        assert "shelved" in screen_text(app)
        await pilot.press("u")
        advance(session, clock, 0.05)
        assert _status(session, second).state != AlertState.SHELVED

        await pilot.press("A")
        advance(session, clock, 0.05)
        assert not any(a.state.unacknowledged for a in session.snapshot().engine.alerts)


async def test_a_new_critical_alert_takes_over_rings_the_bell_and_clears_on_acknowledge():
    session, clock = sim_session(meop_rig_text(), scenario=None)
    app = MonitorApp(session)  # before the run starts: no snapshot yet, an empty screen
    async with app.run_test(size=SIZE) as pilot:
        await _show(app, pilot)
        assert app.view is None and app.bells == 0
        await pilot.press("question_mark")  # the operator is reading the help when it happens
        assert isinstance(app.screen, HelpScreen)
        advance(session, clock, 1.0)
        await _show(app, pilot)
        top = session.snapshot().engine.top_alarm
        assert top is not None and top.name == MEOP_RULE and top.severity == "critical"
        assert app.screen is app.monitor  # the help was closed for it
        assert app.bells == 1
        assert app.settings.selected == MEOP_RULE
        banner = app.monitor.query_one("#banner", TextBlock)
        assert banner.display and banner.has_class("-critical") and app.monitor.has_class("-alarm")
        screen = screen_text(app)
        assert f"▲▲▲ CRITICAL ▲▲▲ {MEOP_RULE}" in screen
        assert "press a to acknowledge" in screen
        # the value on the banner is the judged tank pressure in the channel's unit (bar gauge): above 230
        assert "limit > 230.0 bar g" in screen

        advance(session, clock, 1.0)
        await _show(app, pilot)
        assert app.bells == 1  # one bell per new alarm, not one per refresh
        assert banner.display  # it stays until acknowledged

        await pilot.press("a")
        advance(session, clock, 0.05)
        await _show(app, pilot)
        assert _status(session, MEOP_RULE).state == AlertState.ACTIVE_ACKNOWLEDGED
        assert session.snapshot().engine.top_alarm is None
        assert not banner.display and not app.monitor.has_class("-alarm")
        assert "CRITICAL ▲▲▲" not in screen_text(app)


async def test_the_meop_alert_cannot_be_shelved_from_the_keyboard():
    session, clock = sim_session(meop_rig_text(), scenario=None)
    advance(session, clock, 1.0)
    app = MonitorApp(session)
    async with app.run_test(size=SIZE) as pilot:
        await _show(app, pilot)
        assert app.settings.selected == MEOP_RULE
        await pilot.press("s")
        advance(session, clock, 0.05)
        assert _status(session, MEOP_RULE).state == AlertState.ACTIVE_UNACKNOWLEDGED


async def test_trend_window_keys_and_help_and_link_screens():
    session, clock = sim_session()
    advance(session, clock, 22.0)
    app = MonitorApp(session)
    async with app.run_test(size=SIZE) as pilot:
        await _show(app, pilot)
        assert "last 30 s" in screen_text(app)
        await pilot.press("right_square_bracket")
        assert app.settings.window_s == 60.0 and "last 1 min" in screen_text(app)
        await pilot.press("left_square_bracket", "left_square_bracket", "left_square_bracket")
        assert app.settings.window_s == 10.0 and "last 10 s" in screen_text(app)

        await pilot.press("question_mark")
        help_text = "\n".join(app.screen.body(app.view, 78, 1000) and
                              [plain(line) for line in app.screen.body(app.view, 78, 1000)])
        for key in KEYS:
            if "demo" in key.modes:
                assert f"  {key.label} " in help_text, key.label
        assert "▲▲▲ CRIT" in help_text and "2σ" in help_text and "not a safety interlock" in help_text
        await pilot.press("pagedown")
        assert "↓ more" in screen_text(app) or app.screen.first_row > 0
        await pilot.press("escape")
        assert app.screen is app.monitor

        await pilot.press("l")
        assert isinstance(app.screen, LinkScreen)
        link = screen_text(app)
        assert "mass_flow" in link and "STALE" in link and "last good" in link
        assert "CAUTION MEOP" in link  # the caution line stays on every screen
        await pilot.press("escape")
        assert app.screen is app.monitor


async def test_quitting_a_recorded_run_asks_first_and_closes_the_log(tmp_path):
    path = tmp_path / "run.ejlog"
    session, clock = sim_session(writer_path=path, mode="live")
    advance(session, clock, 3.0)
    app = MonitorApp(session)
    assert app.confirm_quit
    async with app.run_test(size=SIZE) as pilot:
        await _show(app, pilot)
        assert "● REC" in screen_text(app)
        await pilot.press("q")
        assert isinstance(app.screen, ConfirmQuitScreen)
        assert f"{path.parent.name}/{path.name}" in screen_text(app)  # long paths are cut from the left
        await pilot.press("n")
        assert app.screen is app.monitor and app.is_running
        for key in ("ctrl+q", "ctrl+c"):  # textual's own quit keys ask too
            await pilot.press(key)
            assert isinstance(app.screen, ConfirmQuitScreen), key
            await pilot.press("ctrl+q")  # asking twice shows one question
            assert len(app.screen_stack) == 2
            await pilot.press("escape")
            assert app.screen is app.monitor and app.is_running
        advance(session, clock, 1.0)
        await pilot.press("q", "y")
        await pilot.pause()
        assert app.quit_confirmed
    assert session.writer.closed
    log = RunLog.open(path)
    assert not log.warnings  # every row complete: closed cleanly
    table = log.table(columns=["kind", "t_s"])
    assert table["t_s"].max() == pytest.approx(4.0, abs=0.1)


async def test_quitting_an_unrecorded_demo_does_not_ask():
    session, clock = sim_session()
    advance(session, clock, 1.0)
    app = MonitorApp(session)
    async with app.run_test(size=SIZE) as pilot:
        await pilot.press("q")
        await pilot.pause()
        assert not app.is_running
    assert session.snapshot().stopped and not math.isnan(session.snapshot().t_s)
