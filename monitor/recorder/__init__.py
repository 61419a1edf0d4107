"""Recording runs: the run log (ejecta's own file format, docs/run-log.md) and importing other systems' CSV.

monitor.recorder.csv_import (import_csv) is imported on its own: it needs monitor.calibration.
"""

from monitor.recorder.runlog import (
    FORMAT_VERSION,
    ChannelColumn,
    Note,
    RawLines,
    RunLog,
    RunLogHeader,
    RunLogWriter,
    escape_bytes,
    unescape_text,
)

__all__ = [
    "FORMAT_VERSION", "ChannelColumn", "Note", "RawLines", "RunLog", "RunLogHeader", "RunLogWriter",
    "escape_bytes", "unescape_text",
]
