"""`lagwise inspect DATA`: what a diary file holds, before any model is fitted.

Prints prompts scheduled and answered, days and compliance per day, lag windows per depth
(complete and with missing values) and per item the missing count, mean and SD; with
--json OUT also writes these as JSON (models.summary.diary_summary; '-' writes to stdout).
Floor and ceiling are counted at the ends of each item's answer scale: --scale 1-7 for every
item, --scale NAME=0-100 for one (repeatable), otherwise a project's stated scales, otherwise
guessed (models.scales).
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
    parser.add_argument("--scale", metavar="MIN-MAX", action="append", default=[],
                        help="answer scale of every item (e.g. 1-7) or of one item "
                             "(NAME=0-100); repeat for more items; floor and ceiling are "
                             "counted at its ends (default: the smallest usual scale holding "
                             "the answers). A negative low end: --scale=-3-3")
    parser.add_argument("--json", metavar="OUT",
                        help="also write the summary as JSON to OUT ('-': standard output only)")


def run(args: argparse.Namespace) -> int:
    from lagwise.models.scales import item_scales
    from lagwise.models.screening import format_screening, screen_diary, screening_json
    from lagwise.models.summary import diary_summary, format_summary

    diary = diary_from_args(args)
    summary = diary_summary(diary)
    stated = stated_scales(args.scale, diary.items)
    if str(args.data).lower().endswith(".lagwise"):
        from lagwise.models.project import open_project
        stated = {**dict(open_project(args.data).scales), **stated}
    screening = screen_diary(diary, item_scales(diary.items, diary.values, stated))
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


def stated_scales(texts: list[str], items: tuple[str, ...]) -> dict:
    """Item -> (low, high) from --scale values ('1-7' for every item, 'NAME=1-7' for one;
    a later value wins); DataError for a malformed range or an unknown item."""
    from lagwise.models.errors import DataError
    from lagwise.models.scales import parse_scale

    out = {}
    for text in texts:
        name, _, scale = text.rpartition("=")
        if name and name not in items:
            raise DataError(f"--scale {text}: the diary has no item '{name}'")
        out.update(dict.fromkeys([name] if name else items, parse_scale(scale)))
    return out
