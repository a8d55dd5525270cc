"""Command-line options shared by the commands that read a diary (inspect, fit).

    DATA                         the diary file
    --day COL --prompt COL       a grid of prompts per day (absent prompts become missed)
    [--prompts-per-day N]        the schedule, when the last prompts of a day may be missing
    --time COL [--max-gap MIN]   occasions in time order; a new segment at midnight or a gap
    (neither)                    rows in file order, one segment
    --join-days                  let lag windows span nights (one segment over all days)
    --items A,B,...              the items (default: every numeric column not used for time)
    --missing-codes -99,999      answers that mean "missing"
"""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING

from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import DataError

if TYPE_CHECKING:  # the readers (pandas) load when a diary is read, not for --help
    from lagwise.models.recipe import DiaryRecipe


def add_diary_arguments(parser: argparse.ArgumentParser, data: bool = True) -> None:
    """Add DATA (when `data`) and the time, item and missing-value options to `parser`."""
    if data:
        parser.add_argument("data", metavar="DATA",
                            help="diary file: .csv, .tsv, .txt, .xlsx, .sav or .dta")
    time = parser.add_argument_group(
        "time", "how rows are placed in time (without these: file order, one segment)")
    time.add_argument("--day", metavar="COL", help="column with the day (a number or a date)")
    time.add_argument("--prompt", metavar="COL", help="column with the prompt number in the day")
    time.add_argument("--prompts-per-day", metavar="N", type=int,
                      help="prompts scheduled per day (default: the highest prompt number)")
    time.add_argument("--time", metavar="COL", help="column with the date and time of each prompt")
    time.add_argument("--max-gap", metavar="MINUTES", type=float,
                      help="with --time: a longer gap starts a new segment")
    time.add_argument("--join-days", action="store_true",
                      help="one segment over all days (lag windows may span nights)")
    items = parser.add_argument_group("items")
    items.add_argument("--items", metavar="A,B,...",
                       help="item columns (default: every numeric column not used for time)")
    items.add_argument("--missing-codes", metavar="CODES",
                       help="comma-separated answers that mean missing, e.g. -99,999")


def time_settings_from_args(args: argparse.Namespace) -> TimeSettings:
    """The TimeSettings the options describe; DataError for an impossible combination."""
    grid = args.day is not None or args.prompt is not None
    if grid and args.time is not None:
        raise DataError("choose either --day and --prompt (a grid of prompts) or --time, not both")
    if grid and (args.day is None or args.prompt is None):
        raise DataError("--day and --prompt go together: give both columns")
    if args.max_gap is not None and args.time is None:
        raise DataError("--max-gap needs --time")
    if args.prompts_per_day is not None and not grid:
        raise DataError("--prompts-per-day needs --day and --prompt")
    independent = not args.join_days
    if grid:
        return TimeSettings(mode="grid", day=args.day, prompt=args.prompt,
                            days_independent=independent)
    if args.time is not None:
        return TimeSettings(mode="timestamp", time=args.time, max_gap_minutes=args.max_gap,
                            days_independent=independent)
    return TimeSettings(mode="order", days_independent=independent)


def split_list(text: str | None) -> list[str] | None:
    """'a, b,c' -> ['a', 'b', 'c']; None stays None."""
    if text is None:
        return None
    return [part.strip() for part in text.split(",") if part.strip()]


def recipe_from_args(args: argparse.Namespace) -> DiaryRecipe:
    """How the options say the data file becomes a diary."""
    from lagwise.models.recipe import DiaryRecipe

    return DiaryRecipe.of(split_list(args.items), time_settings_from_args(args),
                          split_list(args.missing_codes) or (), args.prompts_per_day)


def diary_from_args(args: argparse.Namespace) -> Diary:
    """Read `args.data` into a Diary as the options say (a .lagwise project: its own diary)."""
    if str(args.data).lower().endswith(".lagwise"):
        from lagwise.models.project import load_project_diary
        return load_project_diary(args.data)
    return recipe_from_args(args).read(args.data)
