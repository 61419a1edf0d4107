"""The monitor's screens: the main monitor, help, link health, and the quit question."""

from monitor.ui.screens.main import MonitorScreen
from monitor.ui.screens.overlays import ConfirmQuitScreen, HelpScreen, LinkScreen

__all__ = ["ConfirmQuitScreen", "HelpScreen", "LinkScreen", "MonitorScreen"]
