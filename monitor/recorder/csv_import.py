"""Import another acquisition system's CSV log as a run log that replays and reviews like a native one.

Each CSV line becomes one row of the run log, its raw field holding the line exactly as it was in the file.
The mapped columns go through the same channel parsing and calibration as live data (monitor.calibration,
with an identity calibration), so units, gauge/abs pressures, standard-flow units, valid ranges and quality
flags mean what they mean live. The format is described in docs/run-log.md ("Importing CSV").
"""

from __future__ import annotations

import csv
import dataclasses
import re
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path
from typing import Any, Iterator, Mapping

import numpy as np
import pandas as pd

from drivers.base import LineStatus, RawBatch
from monitor.calibration import Calibrator, parse_channels
from monitor.clock import Clock, MonotonicClock
from monitor.config import Rig
from monitor.errors import ConfigError, PhysicsError
from monitor.physics import flow_units
from monitor.recorder.writer import RunLogWriter
from monitor.samples import SourceReading
from monitor.units import parse_quantity

ISO8601 = "iso8601"
_COPIED = ("role", "valid_range")  # taken from the rig's channel of the same name, when there is one
_FLOW_KEYS = ("flow_reference", "gas_correction_factor")
_OK, _GARBAGE, _FIELD_COUNT = int(LineStatus.OK), int(LineStatus.GARBAGE), int(LineStatus.FIELD_COUNT)
_ZONE = re.compile(r"(?:Z|z|[+-]\d\d(?::?\d\d)?)$")


@dataclass(frozen=True)
class ImportSummary:
    """What import_csv wrote."""

    path: Path
    lines: int  # data lines (after the preamble and the column names)
    good_lines: int
    bad_lines: int
    channels: tuple[str, ...]


def import_csv(
    csv_path: str | Path,
    out_path: str | Path,
    rig: Rig,
    column_map: Mapping[str, tuple[str, str] | Mapping[str, Any]],
    time_column: str,
    time_unit: str,
    *,
    delimiter: str = ",",
    decimal: str = ".",
    skip_lines: int = 0,
    encoding: str = "utf-8",
    started_utc: datetime | None = None,
    assume_utc: bool = False,
    chunk_lines: int = 50_000,
    clock: Clock | None = None,
) -> ImportSummary:
    """Write a new run log from a CSV file of another acquisition system.

    Args:
        csv_path: the CSV file: optional preamble lines, one line of column names, then one line per sample.
        out_path: the run log to create (never overwritten).
        rig: the rig the data belong to; its text goes into the header, its ambient pressure turns gauge
            pressures absolute, its gas converts standard-flow units, and a rig channel of the same name
            lends its role and valid_range.
        column_map: CSV column name -> (channel name, unit of the column), e.g. ("tank_pressure",
            "psi gauge"), or a [[channels]] table (dict) with at least name and unit; pressures must say
            gauge or abs; standard-flow units need flow_reference as in the rig file.
        time_column: the column holding each line's time.
        time_unit: a time unit ("s", "ms", "us", "min", ...), or "iso8601" for timestamps such as
            "2025-03-01T10:15:02.5+01:00".
        delimiter: field separator; decimal: decimal mark ("," for "1,5").
        skip_lines: preamble lines before the column names (kept in the header as import-line).
        encoding: text encoding of the CSV; a line that cannot be decoded is a bad line.
        started_utc: wall-clock time of the first line, when the CSV's own time is not a timestamp.
        assume_utc: read iso8601 timestamps without a zone as UTC (otherwise they are refused).
        chunk_lines: lines per batch written.
        clock: times the writer's fsyncs (default the monotonic clock).

    Returns:
        ImportSummary. t_s in the log is seconds since the first line with a valid time; device_t_s is the
        CSV's own time in seconds (numeric time units only).

    Raises:
        ConfigError: a column that is not in the CSV, a unit or channel table that is not valid, out_path
            exists, naive timestamps without assume_utc.
    """
    csv_path, out_path = Path(csv_path), Path(out_path)
    if isinstance(skip_lines, bool) or not isinstance(skip_lines, int) or skip_lines < 0:
        raise ConfigError("skip_lines", skip_lines, "a whole number of preamble lines, 0 or more")
    if out_path.exists():  # checked early so that a refused import does not read the whole CSV first
        raise ConfigError("run log", str(out_path), "a file that does not exist yet (ejecta never overwrites)")
    source = str(csv_path)
    try:
        handle = open(csv_path, "rb")
    except OSError as exc:
        raise ConfigError("csv_path", source, f"a readable file ({exc})") from exc
    with handle:
        preamble = [_strip(handle.readline()) for _ in range(skip_lines + 1)]
        names = _fields(preamble[-1].decode(encoding, "replace").lstrip("\ufeff"), delimiter)
        names = [n.strip() for n in names]
        wanted = [time_column, *column_map]
        for key in wanted:
            if key not in names:
                raise ConfigError(
                    "column_map" if key != time_column else "time_column",
                    key,
                    "a column of the CSV: " + ", ".join(repr(n) for n in names),
                    source,
                )
        if len(set(names)) != len(names):
            raise ConfigError("csv columns", names, "distinct column names", source)
        specs = _channel_specs(rig, column_map, source)
        fields = tuple(column_map)
        calibrator = Calibrator(specs, fields)
        time_factor = None if time_unit == ISO8601 else parse_quantity(f"1 {time_unit}", "time", "time_unit")
        index = [names.index(k) for k in wanted]
        extra = [("imported-from", csv_path.name), ("import-time", f"{time_column} in {time_unit}")]
        extra += [("import-column", f"{col} -> {spec.name} in {spec.unit}") for col, spec in zip(fields, specs)]
        extra += [("import-line", line.decode("utf-8", "surrogateescape")) for line in preamble]
        writer = None
        counts = [0, 0]
        first = None  # the first valid time: float seconds, or a UTC pandas Timestamp for iso8601
        try:
            for lines in _chunks(handle, chunk_lines):
                status, good, texts = _split(lines, encoding, delimiter, decimal, len(names), index)
                n = len(lines)
                if time_factor is None:
                    stamps = _iso_stamps(texts[0], good, status, assume_utc, source)
                    if first is None and stamps.notna().any():
                        first = stamps[stamps.notna()].iloc[0]
                        started_utc = first.to_pydatetime()
                    t_s = np.full(n, np.nan)
                    if first is not None:
                        t_s[good] = (stamps - first).dt.total_seconds().to_numpy(np.float64, na_value=np.nan)
                    device = None
                else:  # subtract in the file's unit (exact for whole ms), then scale
                    number = np.full(n, np.nan)
                    number[good], _ = _numbers(texts[0], good, status)
                    if first is None and np.isfinite(number).any():
                        first = float(number[np.isfinite(number)][0])
                    device = _scale(number, time_factor)
                    t_s = _scale(number - (first if first is not None else np.nan), time_factor)
                status[~np.isfinite(t_s) & (status == _OK)] = LineStatus.BAD_NUMBER
                values = np.full((n, len(fields)), np.nan)
                missing = np.zeros((n, len(fields)), dtype=bool)
                for k, column in enumerate(texts[1:]):
                    values[good, k], missing[good, k] = _numbers(column, good, status)
                raw = RawBatch(t_s=t_s, lines=lines, status=status, fields=fields, values=values, device_time_s=device)
                batch = calibrator.apply(raw, missing)
                if writer is None:
                    writer = _writer(out_path, rig, specs, clock, started_utc, extra)
                writer.on_reading(SourceReading(raw, batch))
                counts[0] += int((status == _OK).sum())
                counts[1] += int((status != _OK).sum())
            if writer is None:
                writer = _writer(out_path, rig, specs, clock, started_utc, extra)
            writer.close()
        except BaseException:
            if writer is not None:  # the half-written log is ours: remove it rather than leave a wrong run
                writer.close()
                out_path.unlink(missing_ok=True)
            raise
    return ImportSummary(out_path, counts[0] + counts[1], counts[0], counts[1], tuple(s.name for s in specs))


def _writer(out_path, rig, specs, clock, started_utc, extra) -> RunLogWriter:
    return RunLogWriter(
        out_path,
        rig.text,
        specs,
        clock or MonotonicClock(),
        rig_source=rig.source_path or "",
        started_utc=started_utc,
        started_t_s=0.0,
        extra=extra,
        unknown_start=started_utc is None,
    )


def _channel_specs(rig: Rig, column_map: Mapping[str, Any], source: str):
    """[[channels]] tables for the mapped columns (identity calibration), checked by monitor.calibration."""
    known = {t.get("name"): t for t in rig.channels if isinstance(t, dict)}
    tables = []
    for column, entry in column_map.items():
        if isinstance(entry, Mapping):
            table = {"calibration": {"kind": "identity"}, **entry, "field": column}
        elif isinstance(entry, (tuple, list)) and len(entry) == 2:
            name, unit = entry
            table = {"name": name, "field": column, "unit": unit, "calibration": {"kind": "identity"}}
            base = known.get(name, {})
            table.update({k: base[k] for k in _COPIED if k in base})
            if _is_flow(unit) or _is_flow(base.get("unit")):  # the column's unit, or the lent valid_range's
                table.update({k: base[k] for k in _FLOW_KEYS if k in base})
        else:
            raise ConfigError(f"column_map[{column!r}]", entry, "(channel name, unit) or a [[channels]] table", source)
        tables.append(table)
    try:
        return parse_channels(dataclasses.replace(rig, channels=tuple(tables)), tuple(column_map))
    except ConfigError as exc:
        match = re.match(r"channels\[(\d+)\](.*)", exc.key)
        if not match:
            raise
        column = list(column_map)[int(match.group(1))]
        raise ConfigError(f"column_map[{column!r}]{match.group(2)}", exc.value, exc.expected, source) from exc


def _is_flow(unit: object) -> bool:
    try:
        flow_units.flow_unit(str(unit))
        return True
    except PhysicsError:
        return False


def _strip(line: bytes) -> bytes:
    """A line without its terminator (LF or CR LF)."""
    if line.endswith(b"\n"):
        line = line[:-1]
        if line.endswith(b"\r"):
            line = line[:-1]
    return line


def _chunks(handle, size: int) -> Iterator[list[bytes]]:
    lines: list[bytes] = []
    for line in handle:
        lines.append(_strip(line))
        if len(lines) >= size:
            yield lines
            lines = []
    if lines:
        yield lines


def _fields(text: str, delimiter: str) -> list[str]:
    if '"' not in text:
        return text.split(delimiter)
    return next(csv.reader([text], delimiter=delimiter), [])


def _split(lines, encoding, delimiter, decimal, n_columns, index):
    """Status per line (OK, GARBAGE or FIELD_COUNT), the indices of the OK lines, and for each wanted column
    the texts of its field on those lines."""
    status = np.zeros(len(lines), dtype=np.uint8)
    rows = []
    for k, line in enumerate(lines):
        try:
            text = line.decode(encoding)
        except UnicodeDecodeError:
            text = ""
        if not text.strip():
            status[k] = _GARBAGE
            continue
        fields = text.split(delimiter) if '"' not in text else next(csv.reader([text], delimiter=delimiter), [])
        if len(fields) == n_columns:
            rows.append(fields)
        else:
            status[k] = _FIELD_COUNT
    columns = list(zip(*rows)) if rows else [()] * n_columns
    texts = [columns[j] for j in index]
    if decimal != ".":
        texts = [tuple(t.replace(decimal, ".") for t in column) for column in texts]
    return status, np.flatnonzero(status == _OK), texts


def _numbers(texts, good: np.ndarray, status: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Floats of the texts of the good lines, and where they were empty; a text that is no number is NaN
    and makes its line BAD_NUMBER."""
    try:
        return np.array(texts, dtype=np.float64).reshape(len(texts)), np.zeros(len(texts), dtype=bool)
    except ValueError:
        pass
    out = np.full(len(texts), np.nan)
    empty = np.zeros(len(texts), dtype=bool)
    for k, text in enumerate(texts):
        text = text.strip()
        if not text:
            empty[k] = True
            continue
        try:
            out[k] = float(text)
        except ValueError:
            status[good[k]] = LineStatus.BAD_NUMBER
    return out, empty


def _scale(number: np.ndarray, factor: float) -> np.ndarray:
    """number * factor, as number / n when factor is 1/n for a whole n (1 ms = 1/1000 s), so that e.g.
    120070 ms is 120.07 s and not 120.07000000000001 s."""
    whole = round(1.0 / factor)
    if whole > 1 and abs(1.0 / factor - whole) <= 1e-9 * whole:
        return number / whole
    return number * factor


def _iso_stamps(texts, good: np.ndarray, status: np.ndarray, assume_utc: bool, source: str) -> pd.Series:
    """UTC timestamps of the good lines' ISO 8601 texts (NaT where not one, and that line BAD_NUMBER);
    zone-less texts only with assume_utc."""
    for text in texts:
        if text.strip() and not assume_utc and not _ZONE.search(text.strip()):
            raise ConfigError(
                "time_column", text, "ISO 8601 timestamps with a zone ('Z' or '+01:00'), or assume_utc=True", source
            )
    stamps = pd.to_datetime(pd.Series(texts, dtype=object).str.strip(), format="ISO8601", utc=True, errors="coerce")
    status[good[stamps.isna().to_numpy()]] = LineStatus.BAD_NUMBER
    return stamps
