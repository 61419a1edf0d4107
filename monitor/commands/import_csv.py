"""Turn a CSV export of another acquisition system into a run log that replays and reviews like our own."""

from __future__ import annotations

import argparse
from pathlib import Path


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("csv", type=Path, help="the CSV file: optional preamble, a line of column names, one line per sample")
    parser.add_argument("rig", help="rig file (or bundled rig name) the data belong to")
    parser.add_argument("--out", type=Path, required=True, help="run log to create (never overwritten)")
    parser.add_argument(
        "--time",
        required=True,
        metavar="COLUMN:UNIT",
        help="the time column and its unit, e.g. 'Time:s', 'stamp:ms' or 'when:iso8601'",
    )
    parser.add_argument(
        "--map",
        action="append",
        default=[],
        metavar="COLUMN=CHANNEL:UNIT",
        required=True,
        help="one data column: CSV column, channel name, unit (pressures say gauge or abs), "
        "e.g. 'P1 (psi)=tank_pressure:psi gauge'; repeat for each column",
    )
    parser.add_argument("--delimiter", default=",", help="field separator (default ',')")
    parser.add_argument("--decimal", default=".", help="decimal mark (default '.')")
    parser.add_argument("--skip-lines", type=int, default=0, help="preamble lines before the column names")
    parser.add_argument("--encoding", default="utf-8", help="text encoding of the CSV (default utf-8)")
    parser.add_argument("--assume-utc", action="store_true", help="read ISO 8601 times without a zone as UTC")


def parse_mapping(text: str) -> tuple[str, str, str]:
    """'COLUMN=CHANNEL:UNIT' -> (column, channel, unit); the column name may itself hold ':' but not '='."""
    from monitor.errors import ConfigError

    column, sep, rest = text.rpartition("=")
    channel, sep2, unit = rest.partition(":")
    if not sep or not sep2 or not column or not channel.strip() or not unit.strip():
        raise ConfigError("--map", text, "COLUMN=CHANNEL:UNIT, such as 'P1=tank_pressure:bar gauge'")
    return column, channel.strip(), unit.strip()


def run(args: argparse.Namespace) -> int:
    from monitor.config import load_rig
    from monitor.errors import ConfigError
    from monitor.recorder.csv_import import import_csv
    from monitor.rigs import resolve_rig

    rig = load_rig(resolve_rig(args.rig))
    time_column, sep, time_unit = args.time.rpartition(":")
    if not sep or not time_column or not time_unit:
        raise ConfigError("--time", args.time, "COLUMN:UNIT, such as 'Time:s' or 'stamp:iso8601'")
    if not args.csv.is_file():
        raise ConfigError("csv", str(args.csv), "an existing CSV file")
    column_map = {}
    for text in args.map:
        column, channel, unit = parse_mapping(text)
        column_map[column] = (channel, unit)
    summary = import_csv(
        args.csv,
        args.out,
        rig,
        column_map,
        time_column,
        time_unit,
        delimiter=args.delimiter,
        decimal=args.decimal,
        skip_lines=args.skip_lines,
        encoding=args.encoding,
        assume_utc=args.assume_utc,
    )
    print(f"{summary.lines} lines ({summary.good_lines} good, {summary.bad_lines} kept as bad) -> {summary.path}")
    return 0
