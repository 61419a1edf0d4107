"""The same monitor on a recorded run: pause, step, speed and seek keys move the replay; the end stays on screen."""

from __future__ import annotations

import pytest
from ui_helpers import advance, screen_text

from monitor.clock import FakeClock
from monitor.commands.replay import open_replay
from monitor.demo_logs import DemoLog, make_demo_log
from monitor.session import Session
from monitor.ui import MonitorApp
from monitor.ui.keys import KEYS, SEEK_SHORT_S, STEP_ROWS
from monitor.ui.layout import plain

SAMPLE_RATE_HZ = 200.0


@pytest.fixture(scope="module")
def bench_log(tmp_path_factory):
    """The demo scenario recorded at 200 Hz through the simulator, calibration and recorder (deterministic)."""
    demo = DemoLog("bench_leak.ejlog", "bench_nitrogen_1l", "leak_and_dropout", f"{SAMPLE_RATE_HZ:g} Hz")
    return make_demo_log(demo, tmp_path_factory.mktemp("logs"))


def replay_session(path, speed: float = 1.0) -> tuple[Session, FakeClock]:
    clock = FakeClock()
    rig, source = open_replay(path, clock, speed)
    return Session(rig, source, clock, "replay", trend_span_s=600.0), clock


async def test_replay_keys_pause_step_speed_and_seek(bench_log):
    session, clock = replay_session(bench_log)
    advance(session, clock, 10.0)
    app = MonitorApp(session)
    async with app.run_test(size=(80, 24)) as pilot:
        app.refresh_view()
        await pilot.pause()
        r = session.snapshot().replay
        assert not r.paused and r.speed == 1.0 and r.position_s == pytest.approx(10.0, abs=0.06)
        assert "REPLAY" in screen_text(app) and "playing x1" in screen_text(app)

        await pilot.press("space")
        advance(session, clock, 1.0)
        r = session.snapshot().replay
        assert r.paused
        held = r.position_s
        advance(session, clock, 1.0)
        assert session.snapshot().replay.position_s == held  # paused: the clock runs, the log does not
        app.refresh_view()
        await pilot.pause()
        assert "PAUSED" in screen_text(app)

        await pilot.press("full_stop")
        advance(session, clock, 0.05)
        # one step hands on STEP_ROWS recorded lines: at 200 lines/s, STEP_ROWS / 200 s of log time
        assert session.snapshot().replay.position_s == pytest.approx(held + STEP_ROWS / SAMPLE_RATE_HZ, abs=0.006)

        await pilot.press("plus")
        advance(session, clock, 0.05)
        assert session.snapshot().replay.speed == 2.0
        await pilot.press("minus", "minus")
        advance(session, clock, 0.05)
        assert session.snapshot().replay.speed == 0.5

        before = session.snapshot().replay.position_s
        await pilot.press("right")
        advance(session, clock, 0.05)
        assert session.snapshot().replay.position_s == pytest.approx(before + SEEK_SHORT_S, abs=0.01)
        await pilot.press("left")
        advance(session, clock, 0.05)
        assert session.snapshot().replay.position_s == pytest.approx(before, abs=0.01)

        await pilot.press("space")  # resume at x0.5
        advance(session, clock, 2.0)
        assert session.snapshot().replay.position_s == pytest.approx(before + 1.0, abs=0.06)


async def test_a_replay_runs_to_its_end_and_stays_on_screen(bench_log):
    session, clock = replay_session(bench_log, speed=8.0)
    app = MonitorApp(session)
    async with app.run_test(size=(80, 24)) as pilot:
        advance(session, clock, 7.0)  # 56 s of log at x8: past the 45 s scenario
        app.refresh_view()
        await pilot.pause()
        r = session.snapshot().replay
        assert r.finished and r.position_s == r.end_s
        screen = screen_text(app)
        assert "END OF LOG" in screen
        assert "THRUST (estimated)" in screen and "CAUTION MEOP" in screen
        assert "bench_leak.ejlog (replay, not recording)" in screen  # the link line names the log
        e = session.snapshot().engine.estimates
        # the rig's [simulation]: five 1 s pulses from 2 s, then a burn from 18 s to 28 s: six openings
        assert e.pulse_count == 6
        assert not app.confirm_quit  # a replay records nothing: q quits at once


async def test_the_help_of_a_replay_lists_the_replay_keys(bench_log):
    session, clock = replay_session(bench_log)
    advance(session, clock, 1.0)
    app = MonitorApp(session)
    async with app.run_test(size=(100, 40)) as pilot:
        app.refresh_view()
        await pilot.pause()
        await pilot.press("question_mark")
        text = "\n".join(plain(line) for line in app.screen.body(app.view, 98, 1000))
        for key in KEYS:
            assert f"  {key.label} " in text, key.label
