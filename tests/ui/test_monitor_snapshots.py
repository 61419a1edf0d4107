"""Snapshots of the main screens at 80 x 24 and at a wide size, as text and as styled (ANSI) text.

Each screen is drawn from a FakeClock-driven session, so it is the same on every run; a change to any
character, colour or style of a screen fails here. After a deliberate change, review it and accept it
with `python -m pytest tests/ui --update-ui-snapshots`.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from _pytest.outcomes import Failed
from ui_helpers import advance, meop_rig_text, screen_text, sim_session

from monitor.clock import FakeClock
from monitor.commands.replay import open_replay
from monitor.demo_logs import DemoLog, make_demo_log
from monitor.session import Session
from monitor.ui import MonitorApp

SIZES = {"80x24": (80, 24), "200x50": (200, 50)}


async def _capture(app, pilot, ui_snapshot, name: str, styles: bool = True) -> None:
    app.refresh_view()
    await pilot.pause()
    ui_snapshot(f"{name}.txt", screen_text(app))
    if styles:
        ui_snapshot(f"{name}.ansi", screen_text(app, styles=True))


@pytest.mark.parametrize("size", SIZES)
async def test_demo_screen(size, ui_snapshot):
    session, clock = sim_session()
    advance(session, clock, 22.0)
    app = MonitorApp(session)
    async with app.run_test(size=SIZES[size]) as pilot:
        await _capture(app, pilot, ui_snapshot, f"demo_{size}")


@pytest.mark.parametrize("size", SIZES)
async def test_critical_takeover_screen(size, ui_snapshot):
    session, clock = sim_session(meop_rig_text(), scenario=None)
    advance(session, clock, 3.0)
    app = MonitorApp(session)
    async with app.run_test(size=SIZES[size]) as pilot:
        await _capture(app, pilot, ui_snapshot, f"takeover_{size}")


async def test_help_link_and_quit_screens(tmp_path, monkeypatch, ui_snapshot):
    monkeypatch.chdir(tmp_path)  # a relative log path: the same text on every run
    session, clock = sim_session(writer_path=Path("run.ejlog"), mode="live")
    advance(session, clock, 22.0)
    app = MonitorApp(session)
    async with app.run_test(size=SIZES["80x24"]) as pilot:
        await pilot.press("question_mark")
        await _capture(app, pilot, ui_snapshot, "help_80x24", styles=False)
        await pilot.press("escape", "l")
        await _capture(app, pilot, ui_snapshot, "link_80x24", styles=False)
        await pilot.press("escape", "q")
        await _capture(app, pilot, ui_snapshot, "quit_80x24")
        await pilot.press("n")


async def test_replay_screen(tmp_path_factory, ui_snapshot):
    log = make_demo_log(DemoLog("snap.ejlog", "bench_nitrogen_1l", "leak_and_dropout", "200 Hz"),
                        tmp_path_factory.mktemp("snaplog"))
    clock = FakeClock()
    rig, source = open_replay(log, clock, 4.0)
    session = Session(rig, source, clock, "replay", trend_span_s=600.0)
    advance(session, clock, 7.0)
    app = MonitorApp(session, window_s=60.0)
    app.replay_path = "logs/snap.ejlog"  # the temporary directory differs on every run
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.press("space")
        advance(session, clock, 0.05)
        await _capture(app, pilot, ui_snapshot, "replay_120x40")


def test_the_snapshot_comparer_fails_on_one_changed_character(ui_snapshot, request):
    if request.config.getoption("--update-ui-snapshots"):
        pytest.skip("updating")
    expected = (Path(__file__).with_name("snapshots") / "demo_80x24.txt").read_text(encoding="utf-8")
    changed = expected.replace("CAUTION", "CAUTlON", 1)
    with pytest.raises(Failed, match="screen differs"):
        ui_snapshot("demo_80x24.txt", changed)
    ui_snapshot("demo_80x24.txt", expected)
