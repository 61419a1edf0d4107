"""Recording runs: the run log (our own format, docs/run-log.md) and importing other systems' CSV.

monitor.recorder.csv_import (import_csv) is imported on its own: it needs monitor.calibration.
"""

from monitor.recorder.format import FORMAT_VERSION, ChannelColumn, RunLogHeader, escape_bytes, unescape_text
from monitor.recorder.reader import Note, RawLines, RunLog
from monitor.recorder.writer import RunLogWriter

__all__ = [
    "FORMAT_VERSION",
    "ChannelColumn",
    "Note",
    "RawLines",
    "RunLog",
    "RunLogHeader",
    "RunLogWriter",
    "escape_bytes",
    "unescape_text",
]
