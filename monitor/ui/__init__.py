"""The terminal monitor (textual): one app for live, demo and replay runs, fed by a Session's snapshots."""

from monitor.ui.app import MonitorApp

__all__ = ["MonitorApp"]
