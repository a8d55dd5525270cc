"""What a diary holds, in numbers and in words: occasions, answers, days, lag windows, items.

`diary_summary` gives plain JSON-ready values (None where a number is undefined);
`format_summary` turns them into the readable text `lagwise inspect` prints.
Item SD is the sample standard deviation (divisor n - 1) over the answered prompts.
"""

from __future__ import annotations

import numpy as np

from lagwise.models.diary import Diary
from lagwise.models.texttable import pad, width
from lagwise.models.windows import lag_windows

WINDOW_DEPTHS = (1, 2)


def diary_summary(diary: Diary) -> dict:
    """Counts and item statistics of a diary (the `lagwise inspect --json` contract).

    Keys: occasions (scheduled), days, answered (occasions with at least one item answered),
    windows {"1", "2": complete lag windows}, items {name: missing, mean, sd}; and also
    source, segments, partial_windows (windows with some missing values), compliance per day,
    warnings.
    """
    answered = diary.answered
    windows, partial = {}, {}
    for depth in WINDOW_DEPTHS:
        stacked = lag_windows(diary, depth)
        windows[str(depth)] = stacked.n_complete
        partial[str(depth)] = stacked.n_partial
    items = {}
    for j, name in enumerate(diary.items):
        column = diary.values[:, j]
        answers = column[~np.isnan(column)]
        items[name] = {
            "missing": int(column.size - answers.size),
            "answered": int(answers.size),
            "mean": _number(answers.mean()) if answers.size else None,
            "sd": _number(answers.std(ddof=1)) if answers.size > 1 else None,
        }
    per_day = np.bincount(diary.day, minlength=diary.n_days)       # one pass, not one per day
    answered_per_day = np.bincount(diary.day, weights=answered, minlength=diary.n_days)
    compliance = []
    for d, day_label in enumerate(diary.day_labels):
        scheduled, done = int(per_day[d]), int(answered_per_day[d])
        compliance.append({
            "day": day_label, "scheduled": scheduled, "answered": done,
            "fraction": _number(done / scheduled) if scheduled else None,
        })
    return {
        "source": diary.source,
        "occasions": diary.n_occasions,
        "days": diary.n_days,
        "answered": int(answered.sum()),
        "segments": int(np.unique(diary.segment).size),
        "windows": windows,
        "partial_windows": partial,
        "items": items,
        "compliance": compliance,
        "warnings": list(diary.warnings),
    }


def format_summary(summary: dict) -> str:
    """Readable text of a `diary_summary` result."""
    occasions, answered = summary["occasions"], summary["answered"]
    lines = []
    if summary.get("source"):
        lines.append(summary["source"])
    lines += [
        f"  days: {summary['days']}    segments: {summary['segments']}",
        f"  prompts scheduled: {occasions}    "
        f"answered: {answered} ({_percent(answered, occasions)})",
        "",
        "  lag windows    complete    with missing values",
    ]
    for depth, complete in summary["windows"].items():
        partial = summary["partial_windows"].get(depth, 0)
        lines.append(f"    depth {depth:<8} {complete:>8}    {partial:>8}")
    columns = max(8, *(width(name) for name in summary["items"]))
    lines += ["", f"  {'item':<{columns}}  answered  missing      mean        sd"]
    for name, stats in summary["items"].items():
        lines.append(f"  {pad(name, columns)}  {stats['answered']:>8}  {stats['missing']:>7}"
                     f"  {_fixed(stats['mean'])}  {_fixed(stats['sd'])}")
    lines += ["", "  compliance per day"]
    day_width = max(3, *(width(day["day"]) for day in summary["compliance"]))
    for day in summary["compliance"]:
        share = _percent(day["answered"], day["scheduled"])
        lines.append(f"    day {pad(day['day'], day_width)}  {day['answered']:>3} of "
                     f"{day['scheduled']} answered ({share})")
    if summary["warnings"]:
        lines += ["", "  warnings"]
        lines += [f"    - {note}" for note in summary["warnings"]]
    return "\n".join(lines)


def _number(value: float) -> float | None:
    value = float(value)
    return value if np.isfinite(value) else None


def _fixed(value: float | None) -> str:
    return f"{value:>8.3f}" if value is not None else f"{'-':>8}"


def _percent(part: int, whole: int) -> str:
    return f"{100 * part / whole:.0f}%" if whole else "-"
