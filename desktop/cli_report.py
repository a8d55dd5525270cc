"""`lagwise report PROJECT.lagwise --out report.html|report.pdf`: the report of a saved
analysis (models.reporting), written as HTML or as a PDF on A4 or Letter pages
(desktop.report_output); given the folder of a `lagwise batch` instead, the report of that
study (one model per person). The diagrams are drawn by Qt without a display.
"""

from __future__ import annotations

import argparse
import os
from pathlib import Path

PAGE_CHOICES = ("a4", "letter")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("project", metavar="PROJECT",
                        help="a saved project (.lagwise) holding results, or the folder a "
                             "'lagwise batch' wrote (a study report across people)")
    parser.add_argument("--run", metavar="NAME",
                        help="the named run to report (default: the project's current result)")
    parser.add_argument("--page-size", choices=PAGE_CHOICES, default="a4",
                        help="paper size of a PDF report: a4 (default) or letter")
    parser.add_argument("--out", metavar="FILE", required=True,
                        help="the report to write: a name ending in .html or .pdf")


def run(args: argparse.Namespace) -> int:
    from lagwise.desktop.app import has_display

    if not has_display():
        os.environ["QT_QPA_PLATFORM"] = "offscreen"
    from lagwise.desktop.app import make_app
    from lagwise.desktop.report_output import report_suffix, write_report
    from lagwise.models.errors import DataError
    from lagwise.models.project import lagwise_version, open_project
    from lagwise.models.reporting.source import report_input
    from lagwise.models.reporting.study import study_input

    report_suffix(args.out)              # an unknown suffix is refused before any work
    if Path(args.project).is_dir():
        if args.run is not None:
            raise DataError(f"{args.project}: a batch folder has no runs; --run is for projects")
        inp = study_input(args.project, lagwise_version())
    else:
        inp = report_input(open_project(args.project), args.run)
    make_app()
    path = write_report(inp, args.out, args.page_size)
    print(f"The report was written to {path}")
    return 0
