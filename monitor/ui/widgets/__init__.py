"""The monitor's widgets: text blocks that draw laid-out lines (monitor.ui.layout) with the styles of monitor.tcss."""

from monitor.ui.widgets.blocks import STYLE_NAMES, TextBlock

__all__ = ["STYLE_NAMES", "TextBlock"]
