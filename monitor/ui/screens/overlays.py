"""Screens over the monitor: help (every key), link health in full, and the question before quitting a recording."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import ModalScreen, Screen

from monitor.safety import GENERAL_CAUTIONS
from monitor.ui import layout
from monitor.ui.keys import CLOSE_KEYS
from monitor.ui.layout import fit, fit_left
from monitor.ui.view import MonitorView
from monitor.ui.widgets import TextBlock


class _Overlay(Screen):
    """A full screen over the monitor that closes with Esc (and q, ?, l, F1); the caution line stays on top.

    The body scrolls with the arrow keys and PgUp / PgDn when it is longer than the screen.
    """

    BINDINGS = [Binding(k, "close", "close", show=False) for k in CLOSE_KEYS] + [
        Binding("up", "scroll_by(-1)", show=False), Binding("k", "scroll_by(-1)", show=False),
        Binding("down", "scroll_by(1)", show=False), Binding("j", "scroll_by(1)", show=False),
        Binding("pageup", "scroll_by(-10)", show=False), Binding("pagedown", "scroll_by(10)", show=False),
        Binding("home", "scroll_by(-1000)", show=False),
    ]
    title_text = ""

    def __init__(self) -> None:
        super().__init__()
        self.first_row = 0

    def compose(self) -> ComposeResult:
        yield TextBlock(lambda v, w, h: [((fit(f" {self.title_text} · Esc closes", w), "label"),)], self.app.view,
                        id="overlay-title")
        yield TextBlock(layout.caution_line_block, self.app.view, id="caution")
        yield TextBlock(self._page, self.app.view, id="body")

    # Each overlay defines body(view, width, height) -> list[layout.Line]: the lines it shows.

    def _page(self, view: MonitorView, width: int, height: int) -> list[layout.Line]:
        lines = self.body(view, width, height)
        self.first_row = min(max(self.first_row, 0), max(len(lines) - height, 0))
        page = lines[self.first_row : self.first_row + height]
        if self.first_row + height < len(lines) and page:
            page[-1] = ((fit(" ↓ more (↓, PgDn)", width), "dim"),)
        return page

    def show(self, view: MonitorView) -> None:
        for block in self.query(TextBlock):
            block.show(view)

    def action_scroll_by(self, rows: int) -> None:
        self.first_row += rows
        self.query_one("#body", TextBlock).show(self.app.view)

    def action_close(self) -> None:
        self.app.pop_screen()


class HelpScreen(_Overlay):
    """Every key of this mode, what the alert marks and states mean, the units, and the cautions."""

    title_text = "HELP"

    def body(self, view: MonitorView, width: int, height: int) -> list[layout.Line]:
        cautions = (view.cautions[0], *GENERAL_CAUTIONS) if view is not None else GENERAL_CAUTIONS
        return layout.help_lines(self.app.mode, width, cautions)


class LinkScreen(_Overlay):
    """Link health in full: every channel, the link counts, the latest link events, recording, problems."""

    title_text = "LINK HEALTH"

    def body(self, view: MonitorView, width: int, height: int) -> list[layout.Line]:
        return layout.link_lines(view.link, width, 1000)


class ConfirmQuitScreen(ModalScreen[bool]):
    """Asks before a recorded run is stopped: y (or Enter) stops and closes the log, n (or Esc) carries on."""

    BINDINGS = [Binding("y", "answer(True)", "yes"), Binding("enter", "answer(True)", "yes", show=False),
                Binding("n", "answer(False)", "no"), Binding("escape", "answer(False)", "no", show=False),
                Binding("q", "answer(False)", "no", show=False)]

    def __init__(self, log_path: str):
        super().__init__(id="confirm-quit")
        self.log_path = log_path

    def compose(self) -> ComposeResult:
        yield TextBlock(self._lines, self.log_path, id="question")

    @staticmethod
    def _lines(log_path: str, width: int, height: int) -> list[layout.Line]:
        rows = [(" STOP THIS RUN?", "label"), ("", ""), (" Recording stops and the log is closed:", ""),
                (" " + fit_left(log_path, width - 2), "dim"), ("", ""), (" y  stop and quit        n  carry on", "label")]
        return [((fit(text, width), style),) for text, style in rows][:height]

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)
