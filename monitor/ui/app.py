"""MonitorApp: the textual application that shows a Session; it renders snapshots and queues operator actions.

The app never touches acquisition or the engine: a timer takes session.snapshot() 10 times a second (by
default), builds the view (monitor.ui.view) and hands it to the screen, whose blocks redraw only when their
text changed. Keys queue actions on the session (acknowledge, shelve, pause, seek...), which its worker
thread carries out.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from textual.app import App

from monitor.ui.display import DisplayUnits
from monitor.ui.keys import SHELVE_S, SPEEDS, STEP_ROWS
from monitor.ui.screens import ConfirmQuitScreen, HelpScreen, LinkScreen, MonitorScreen
from monitor.ui.view import MonitorView, ViewSettings, build_view, next_selection, next_window

DEFAULT_REFRESH_HZ = 10.0


class MonitorApp(App):
    """The monitor on one session.

    Args:
        session: a monitor.session.Session (started or not: start_session decides), or anything with its
            snapshot(), acknowledge(), acknowledge_all(), shelve(), unshelve(), toggle_pause(), set_speed(),
            seek_by(), step(), start(), stop(), mode, rig, writer and engine (channels, alerts.rules).
        channels: the channel specs for display units (default: the engine's).
        refresh_hz: how often the screen takes a snapshot, Hz (10 to 20 is plenty).
        start_session: start the session's worker thread when the app starts (False: the caller drives it,
            e.g. a test with session.pump()).
        confirm_quit: ask before quitting (default: while the session records).
        window_s: the first trend window, s.
    """

    CSS_PATH = "monitor.tcss"
    ENABLE_COMMAND_PALETTE = False
    TITLE = "ejecta"

    def __init__(self, session, *, channels=None, refresh_hz: float = DEFAULT_REFRESH_HZ, start_session: bool = False,
                 confirm_quit: bool | None = None, window_s: float = 30.0):
        super().__init__()
        self.session = session
        self.mode = session.mode
        engine = session.engine
        self.units = DisplayUnits(session.rig, channels if channels is not None else engine.channels,
                                  engine.alerts.rules)
        self.shelvable = {r.name: r.shelvable for r in engine.alerts.rules}
        self.refresh_hz = float(refresh_hz)
        self.start_session = start_session
        self.confirm_quit = session.writer is not None if confirm_quit is None else confirm_quit
        self.settings = ViewSettings(window_s=window_s)
        self.snapshot = None
        self.view: MonitorView | None = None
        self.bells = 0  # bells rung (one per new top-severity alarm)
        self.quit_confirmed = False
        self.requested_speed: float | None = None
        log = getattr(session.source, "log", None)
        self.replay_path = str(log.path) if session.mode == "replay" and log is not None else None
        self._alarm_key = None
        self._dirty = False

    def get_default_screen(self) -> MonitorScreen:
        return MonitorScreen(self.mode)

    @property
    def monitor(self) -> MonitorScreen:
        return self.screen_stack[0]  # type: ignore[return-value]

    def on_mount(self) -> None:
        if self.start_session and not self.session.running:
            self.session.start()
        self.refresh_view()
        self.set_interval(1.0 / self.refresh_hz, self.refresh_view)

    # --- the refresh ---------------------------------------------------------------------------------------
    def refresh_view(self) -> MonitorView | None:
        """Take the newest snapshot and show it (skipped when neither it nor the settings changed)."""
        snapshot = self.session.snapshot()
        if snapshot is None or (snapshot is self.snapshot and not self._dirty):
            return self.view
        self.snapshot, self._dirty = snapshot, False
        self._attention(snapshot)
        view = build_view(snapshot, self.units, self.settings, self.replay_path)
        if view.selected != self.settings.selected:
            self.settings = replace(self.settings, selected=view.selected)
        self.view = view
        self.monitor.show(view)
        if self.screen is not self.monitor and hasattr(self.screen, "show"):
            self.screen.show(view)
        return view

    def _attention(self, snapshot) -> None:
        """A new top-severity alarm: select it, bring the monitor screen back to the front, ring the bell."""
        top = snapshot.engine.top_alarm
        key = None if top is None else (top.name, top.since_s)
        if key is not None and key != self._alarm_key:
            self.settings = replace(self.settings, selected=top.name)
            while len(self.screen_stack) > 1:
                self.pop_screen()
            self.bells += 1
            self.bell()
        self._alarm_key = key

    def _changed(self) -> None:
        self._dirty = True
        self.refresh_view()

    # --- operator actions ----------------------------------------------------------------------------------
    def acknowledge_selected(self) -> None:
        if self.settings.selected is not None:
            self.session.acknowledge(self.settings.selected)

    def acknowledge_all(self) -> None:
        self.session.acknowledge_all()

    def shelve_selected(self) -> None:
        name = self.settings.selected
        if name is None:
            return
        if not self.shelvable.get(name, True):
            self.notify(f"{name} cannot be shelved", severity="warning")
            return
        self.session.shelve(name, SHELVE_S)

    def unshelve_selected(self) -> None:
        if self.settings.selected is not None:
            self.session.unshelve(self.settings.selected)

    def move_selection(self, step: int) -> None:
        if self.view is not None:
            self.settings = replace(self.settings, selected=next_selection(self.view, step))
            self._changed()

    def change_window(self, step: int) -> None:
        self.settings = replace(self.settings, window_s=next_window(self.settings.window_s, step))
        self._changed()

    def step_replay(self) -> None:
        self.session.step(STEP_ROWS)

    def change_speed(self, step: int) -> None:
        """One step up or down SPEEDS from the speed last asked for (the snapshot may not show it yet)."""
        replay = getattr(self.snapshot, "replay", None)
        if replay is None:
            return
        current = self.requested_speed if self.requested_speed is not None else replay.speed
        index = min(range(len(SPEEDS)), key=lambda k: abs(SPEEDS[k] - current))
        self.requested_speed = SPEEDS[min(max(index + step, 0), len(SPEEDS) - 1)]
        self.session.set_speed(self.requested_speed)

    def open_help(self) -> None:
        self.push_screen(HelpScreen())

    def open_link(self) -> None:
        self.push_screen(LinkScreen())

    def request_quit(self) -> None:
        """Quit; while recording, ask first (the answer y stops the session, which closes the log)."""
        if not self.confirm_quit:
            self.stop_and_exit()
            return
        if isinstance(self.screen, ConfirmQuitScreen):
            return
        path = getattr(self.session.writer, "path", None)
        self.push_screen(ConfirmQuitScreen(str(path) if path else "(no log)"), self._quit_answer)

    async def action_quit(self) -> None:
        """textual's own quit key (Ctrl+Q) asks first too while recording."""
        self.request_quit()

    async def action_help_quit(self) -> None:
        """Ctrl+C: the same as q (textual would only show a hint)."""
        self.request_quit()

    def _quit_answer(self, yes: bool | None) -> None:
        if yes:
            self.quit_confirmed = True
            self.stop_and_exit()

    def stop_and_exit(self) -> None:
        """Stop the session (the recorder flushes and closes the log) and leave the app."""
        self.session.stop()
        self.exit()

    @property
    def log_path(self) -> Path | None:
        path = getattr(self.session.writer, "path", None)
        return Path(path) if path is not None else None


def run_session(session, **options) -> MonitorApp:
    """Start the session, show it until the operator quits, and stop it (the recorder closes its log).

    The session is started before the screen takes over the terminal, so that a port that cannot be opened
    raises its SourceError (exit code 3) as a plain message, not inside the UI.

    Args:
        session: a monitor.session.Session, not yet started.
        **options: MonitorApp's keyword arguments.

    Returns:
        The app after it has ended (its quit_confirmed, log_path and return_code tell how).
    """
    session.start()
    try:
        app = MonitorApp(session, **options)
        app.run(mouse=False)
    finally:
        session.stop()
    return app
