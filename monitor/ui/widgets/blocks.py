"""TextBlock: one widget that draws a block of pre-laid-out lines; it redraws only when its lines change.

A screen of a few such blocks costs far less per refresh than many small widgets or a table (each block is
one region of the screen, rendered as one Rich Text). The styles of a line's segments are component
classes (`block--critical`, `block--selected`, ...) styled in monitor.tcss, so colours live in one file and
every meaning is also carried by the text itself (marks, words), never by colour alone.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from rich.style import Style
from rich.text import Text
from textual.widget import Widget

from monitor.ui.layout import Line

STYLE_NAMES = ("label", "big", "dim", "critical", "warning", "advisory", "selected", "new", "caution", "stale", "key",
               "bars")


class TextBlock(Widget):
    """A block of lines laid out by `lay(model, width, height)`; show(model) hands it a new model.

    Args:
        lay: the pure layout function for this block.
        model: the first model (may be None: the block stays blank until show()).
    """

    COMPONENT_CLASSES = {f"block--{name}" for name in STYLE_NAMES}
    DEFAULT_CSS = "TextBlock { height: 1; }"

    def __init__(self, lay: Callable[[Any, int, int], list[Line]], model: Any = None, **kwargs: Any):
        super().__init__(**kwargs)
        self.lay = lay
        self.model = model
        self.lines: list[Line] = []
        self._laid_for: tuple[int, int] | None = None
        self.renders = 0  # how many times render() ran (the frame-cost script reads it)

    def _layout(self) -> list[Line]:
        width, height = self.size.width, self.size.height
        if self.model is None or width <= 0 or height <= 0:
            return []
        return self.lay(self.model, width, height)

    def show(self, model: Any) -> bool:
        """Take a new model; refresh only if the lines it gives differ. Returns whether it refreshed."""
        self.model = model
        lines = self._layout()
        if lines == self.lines and self._laid_for == (self.size.width, self.size.height):
            return False
        self.lines, self._laid_for = lines, (self.size.width, self.size.height)
        self.refresh()
        return True

    def text_lines(self) -> list[str]:
        """The block's lines as plain text (what a monochrome terminal shows)."""
        return ["".join(text for text, _ in line) for line in self._current()]

    def _current(self) -> list[Line]:
        if self._laid_for != (self.size.width, self.size.height):
            self.lines, self._laid_for = self._layout(), (self.size.width, self.size.height)
        return self.lines

    def _style(self, names: str, cache: dict[str, Style]) -> Style:
        if names not in cache:
            parts = [self.get_component_rich_style(f"block--{n}", partial=True) for n in names.split() if n in STYLE_NAMES]
            cache[names] = Style.combine(parts) if parts else Style()
        return cache[names]

    def render(self) -> Text:
        self.renders += 1
        cache: dict[str, Style] = {}
        text = Text(no_wrap=True, overflow="crop", end="")
        for index, line in enumerate(self._current()):
            if index:
                text.append("\n")
            for segment, names in line:
                text.append(segment, self._style(names, cache) if names else None)
        return text
