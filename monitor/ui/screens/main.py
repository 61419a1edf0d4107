"""The monitor screen: header, caution line, attention banner, big numbers, trends, alerts, link line, keys."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.css.query import NoMatches
from textual.events import Resize
from textual.screen import Screen

from monitor.ui import layout
from monitor.ui.keys import KEYS, key_bar_items
from monitor.ui.view import MonitorView
from monitor.ui.widgets import TextBlock

WIDE_COLUMNS = 120  # from this width the trends get more room than the alerts
TALL_ROWS = 36  # from this height the link table is shown in full
BIG_COLUMNS = 128  # from this width (and TALL_ROWS) the big numbers are drawn twice as large
REPLAY_ACTIONS = frozenset(k.action.split("(")[0] for k in KEYS if k.modes == frozenset({"replay"}))


def _bindings() -> list[Binding]:
    out = []
    for key in KEYS:
        for name in key.keys:
            out.append(Binding(name, key.action, key.short or key.description, show=False,
                               priority=name.startswith("ctrl+")))
    return out


class MonitorScreen(Screen):
    """The one screen the operator watches; show(view) updates every block that changed."""

    BINDINGS = _bindings()

    def __init__(self, mode: str):
        super().__init__(id="monitor")
        self.mode = mode
        self.view: MonitorView | None = None

    def compose(self) -> ComposeResult:
        yield TextBlock(layout.header_line_block, id="header")
        yield TextBlock(layout.caution_line_block, id="caution")
        yield TextBlock(lambda b, w, h: layout.banner_lines(b, w, h), id="banner")
        yield TextBlock(lambda v, w, h: layout.tile_lines(v.tiles, w, h), id="tiles")
        with Horizontal(id="lower"):
            yield TextBlock(lambda v, w, h: layout.trend_lines(v.trends, v.window_s, w, h), id="trends")
            yield TextBlock(layout.alert_lines, id="alerts")
        yield TextBlock(lambda v, w, h: layout.link_lines(v.link, w, h), id="link")
        yield TextBlock(lambda items, w, h: [layout.key_line(items, w)], key_bar_items(self.mode), id="keys")

    def on_mount(self) -> None:
        if self.view is not None:
            self.show(self.view)

    def on_resize(self, event: Resize) -> None:
        self.set_class(event.size.width >= WIDE_COLUMNS, "-wide")
        self.set_class(event.size.height >= TALL_ROWS, "-tall")
        self.set_class(event.size.height >= TALL_ROWS and event.size.width >= BIG_COLUMNS, "-big")

    def show(self, view: MonitorView) -> None:
        """Hand the view to every block; the banner and the alarm look follow the view's banner."""
        self.view = view
        try:
            banner = self.query_one("#banner", TextBlock)
        except NoMatches:  # not composed yet: on_mount shows it
            return
        level = view.banner.level if view.banner else ""
        for name in ("critical", "warning", "advisory"):
            banner.set_class(level == name, f"-{name}")
        banner.set_class(view.banner is not None, "-shown")
        self.set_class(view.banner is not None, "-alarm")
        banner.show(view.banner)
        for block_id in ("header", "caution", "tiles", "trends", "alerts", "link"):
            self.query_one(f"#{block_id}", TextBlock).show(view)

    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        if action in REPLAY_ACTIONS:
            return self.mode == "replay"
        return True

    # Every action is the app's: the screen only routes keys.
    def action_request_quit(self) -> None:
        self.app.request_quit()

    def action_help(self) -> None:
        self.app.open_help()

    def action_link(self) -> None:
        self.app.open_link()

    def action_acknowledge(self) -> None:
        self.app.acknowledge_selected()

    def action_acknowledge_all(self) -> None:
        self.app.acknowledge_all()

    def action_shelve(self) -> None:
        self.app.shelve_selected()

    def action_unshelve(self) -> None:
        self.app.unshelve_selected()

    def action_select(self, step: int) -> None:
        self.app.move_selection(step)

    def action_window(self, step: int) -> None:
        self.app.change_window(step)

    def action_pause(self) -> None:
        self.app.session.toggle_pause()

    def action_step(self) -> None:
        self.app.step_replay()

    def action_speed(self, step: int) -> None:
        self.app.change_speed(step)

    def action_seek(self, delta_s: float) -> None:
        self.app.session.seek_by(delta_s)
