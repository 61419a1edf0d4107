"""Review a recorded run: replay it through the engine and print a summary, JSON, or write an HTML report."""

from __future__ import annotations

import argparse
import sys


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("log", help="run log (.ejlog, or one made by `ejecta import`)")
    parser.add_argument("--json", action="store_true", help="print one JSON object, SI units in the key names")
    parser.add_argument("--report", metavar="FILE.html", default=None,
                        help="write a self-contained HTML report with plots to this file")
    parser.add_argument("--predict", action="store_true",
                        help="overlay the rig's pre-test prediction and report measured over predicted")


def run(args: argparse.Namespace) -> int:
    from pathlib import Path

    from monitor.review import review_log
    from monitor.review.render_json import to_json
    from monitor.review.render_text import render_text

    review = review_log(args.log, with_prediction=args.predict)
    if args.report:
        from monitor.review.report_html import render_html

        Path(args.report).write_text(render_html([review], title=f"Review of {Path(args.log).name}"), encoding="utf-8")
    for warning in review.summary.log.warnings:
        print(f"ejecta review: warning: {warning}", file=sys.stderr)
    print(to_json(review.summary) if args.json else render_text(review.summary))
    if args.report and not args.json:
        print(f"\nreport written to {args.report}")
    return 0
