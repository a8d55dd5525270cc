"""Command-line options shared by the commands that read a diary (inspect, fit).

    DATA                         the diary file
    --day COL --prompt COL       a grid of prompts per day (absent prompts become missed)
    [--prompts-per-day N]        the schedule, when the last prompts of a day may be missing
    --time COL [--max-gap MIN]   occasions in time order; a new segment at midnight or a gap
    [--date-format FORMAT]       how the dates are written, e.g. %d/%m/%Y %H:%M (needed when
                                 day and month cannot be told apart)
    (neither)                    rows in file order, one segment
    --join-days                  let lag windows span nights (one segment over all days)
    --items A,B,...              the items (default: every numeric column not used for time)
    --missing-codes -99,999      answers that mean "missing"

Numeric options are parsed by `in_range` with the engine's limits (models.limits): a value
out of range is a usage error (exit 2) naming the range.
"""

from __future__ import annotations

import argparse
from typing import TYPE_CHECKING, Callable

from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import DataError
from lagwise.models.limits import MAX_GAP_MINUTES, PROMPTS_PER_DAY, Limit

if TYPE_CHECKING:  # the readers (pandas) load when a diary is read, not for --help
    from lagwise.models.recipe import DiaryRecipe


def in_range(limit: Limit) -> Callable[[str], int | float]:
    """An argparse `type=` reading a number within `limit` (ArgumentTypeError otherwise)."""
    def parse(text: str) -> int | float:
        try:
            value = int(text) if limit.whole else float(text)
        except ValueError:
            kind = "a whole number" if limit.whole else "a number"
            raise argparse.ArgumentTypeError(f"'{text}' is not {kind}") from None
        if not limit.allows(value):
            raise argparse.ArgumentTypeError(f"the {limit.words} should be {limit.describe()}, "
                                             f"not {text}")
        return value
    return parse


def date_format(text: str) -> str:
    """An argparse `type=` for a strftime date format: it must hold a % field."""
    if "%" not in text:
        raise argparse.ArgumentTypeError(f"'{text}' is not a date format such as %d/%m/%Y %H:%M")
    return text


def add_diary_arguments(parser: argparse.ArgumentParser, data: bool = True) -> None:
    """Add DATA (when `data`) and the time, item and missing-value options to `parser`."""
    if data:
        parser.add_argument("data", metavar="DATA",
                            help="diary file: .csv, .tsv, .txt, .xlsx, .sav or .dta")
    time = parser.add_argument_group(
        "time", "how rows are placed in time (without these: file order, one segment)")
    time.add_argument("--day", metavar="COL", help="column with the day (a number or a date)")
    time.add_argument("--prompt", metavar="COL", help="column with the prompt number in the day")
    time.add_argument("--prompts-per-day", metavar="N", type=in_range(PROMPTS_PER_DAY),
                      help="prompts scheduled per day (default: the highest prompt number)")
    time.add_argument("--time", metavar="COL", help="column with the date and time of each prompt")
    time.add_argument("--max-gap", metavar="MINUTES", type=in_range(MAX_GAP_MINUTES),
                      help="with --time: a longer gap starts a new segment")
    time.add_argument("--date-format", metavar="FORMAT", type=date_format,
                      help="how the dates of --time or --day are written, as strftime fields, "
                           "e.g. '%%d/%%m/%%Y %%H:%%M'; needed when no day is above 12, so day "
                           "and month cannot be told apart")
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
    if args.date_format is not None and args.time is None and args.day is None:
        raise DataError("--date-format needs --time or --day")
    independent = not args.join_days
    if grid:
        return TimeSettings(mode="grid", day=args.day, prompt=args.prompt,
                            days_independent=independent, date_format=args.date_format)
    if args.time is not None:
        return TimeSettings(mode="timestamp", time=args.time, max_gap_minutes=args.max_gap,
                            days_independent=independent, date_format=args.date_format)
    return TimeSettings(mode="order", days_independent=independent)


def split_list(text: str | list[str] | None) -> list[str] | None:
    """'a, b,c' -> ['a', 'b', 'c']; a list (names already apart, which may hold commas) and
    None stay as they are."""
    if text is None or isinstance(text, list):
        return text
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
