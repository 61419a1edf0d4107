"""Compare recorded runs side by side: a table of the key figures, JSON, or an HTML report with overlaid plots."""

from __future__ import annotations

import argparse
import json
import sys


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("logs", nargs="+", metavar="LOG", help="two or more run logs")
    parser.add_argument("--json", action="store_true", help="print one JSON object: the runs and their summaries")
    parser.add_argument("--report", metavar="FILE.html", default=None,
                        help="write a self-contained HTML report with the runs' plots overlaid")
    parser.add_argument("--predict", action="store_true", help="also compare each run with its rig's prediction")


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from monitor.errors import ConfigError
    from monitor.review import review_log
    from monitor.review.compare import compare_dict, labels_for, render_compare_text

    if len(args.logs) < 2:
        raise ConfigError("LOG", args.logs, "two or more run logs to compare")
    reviews = [review_log(path, with_prediction=args.predict) for path in args.logs]
    if args.report:
        from monitor.review.report_html import render_html

        Path(args.report).write_text(render_html(reviews, labels_for(reviews), title="Comparison of runs"),
                                     encoding="utf-8")
    for label, review in zip(labels_for(reviews), reviews):
        for warning in review.summary.log.warnings:
            print(f"ejecta compare: warning ({label}): {warning}", file=sys.stderr)
    if args.json:
        print(json.dumps(compare_dict(reviews), indent=2, allow_nan=False))
    else:
        print(render_compare_text(reviews))
        if args.report:
            print(f"\nreport written to {args.report}")
    return 0
