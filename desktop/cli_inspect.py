"""`lagwise inspect DATA`: what a diary file holds, before any model is fitted.

Prints prompts scheduled and answered, days and compliance per day, lag windows per depth
(complete and with missing values) and per item the missing count, mean and SD; with
--json OUT also writes these as JSON (models.summary.diary_summary; '-' writes to stdout).
The computation is imported when the command runs, so `lagwise inspect --help` is instant.
"""

from __future__ import annotations

import argparse
import json
import sys

from lagwise.desktop.cli_common import add_diary_arguments, diary_from_args
from lagwise.models.atomic import write_output


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_diary_arguments(parser)
    parser.add_argument("--json", metavar="OUT",
                        help="also write the summary as JSON to OUT ('-': standard output only)")


def run(args: argparse.Namespace) -> int:
    from lagwise.models.screening import format_screening, screen_diary, screening_json
    from lagwise.models.summary import diary_summary, format_summary

    diary = diary_from_args(args)
    summary = diary_summary(diary)
    screening = screen_diary(diary)
    for name, extra in screening_json(screening).items():
        summary["items"][name].update(extra)
    text = json.dumps(summary, indent=2, allow_nan=False)
    if args.json == "-":
        sys.stdout.write(text + "\n")
        return 0
    print(format_summary(summary))
    print()
    print(format_screening(screening))
    if args.json:
        write_output(args.json, text + "\n", "the summary")
    return 0
