"""Preparation steps the data layer applies to a diary before estimation.

The stationary model assumes a stable level; these steps remove what a user may know to
be a nuisance (common practice in single-person diary analysis):

- "detrend":       remove a linear trend per item: the residuals of the OLS line on the
                   occasion index (as in models.screening), so slope and mean become 0;
- "prompt_means":  remove prompt-position means: x - mean of the item at that prompt number;
- "weekday_means": remove day-of-week means: x - mean of the item on that weekday
                   (occasions whose weekday is unknown are centred as one group);
- "standardize":   (x - mean) / SD (divisor n - 1) over the answered values.

Each step may be limited to some items (`items`; None: every item). Unanswered prompts stay
NaN. Steps apply in the order given, each to the result of the one before, and the order
matters: removing prompt means after a detrend can leave a small slope, and a standardize
before another step no longer gives SD 1. `usual_order` sorts steps as listed above:
the removals first (trend, prompt, weekday), the rescaling last, so a standardized result
really has mean 0 and SD 1. A list of steps is plain data with a JSON round trip.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from lagwise.models.diary import Diary
from lagwise.models.errors import DataError, ProjectError
from lagwise.models.screening import weekdays

STEP_NAMES: tuple[str, ...] = ("detrend", "prompt_means", "weekday_means", "standardize")
STEP_LABELS = {
    "detrend": "Remove a linear trend per item",
    "prompt_means": "Remove prompt-position means",
    "weekday_means": "Remove day-of-week means",
    "standardize": "Standardize (mean 0, SD 1)",
}


@dataclass(frozen=True)
class Step:
    """One preparation step: its name (one of STEP_NAMES) and the items it applies to."""

    name: str
    items: tuple[str, ...] | None = None

    @property
    def label(self) -> str:
        words = STEP_LABELS.get(self.name, self.name)
        return words if self.items is None else f"{words} ({', '.join(self.items)})"

    def to_json(self) -> dict:
        return {"name": self.name, "items": None if self.items is None else list(self.items)}

    @classmethod
    def from_json(cls, data: object) -> "Step":
        if isinstance(data, str):
            data = {"name": data}
        if not isinstance(data, dict) or not isinstance(data.get("name"), str):
            raise ProjectError("a preparation step must be a name or {'name': ...}, "
                               f"not {data!r}")
        if data["name"] not in STEP_NAMES:
            raise ProjectError(f"unknown preparation step '{data['name']}' "
                               f"(known: {', '.join(STEP_NAMES)})")
        items = data.get("items")
        if items is not None and (not isinstance(items, list)
                                  or not all(isinstance(i, str) for i in items)):
            raise ProjectError(f"preparation step '{data['name']}': 'items' must be a list "
                               "of item names")
        return cls(data["name"], None if items is None else tuple(items))


def steps_to_json(steps: tuple[Step, ...] | list[Step]) -> list[dict]:
    return [step.to_json() for step in steps]


def steps_from_json(data: object) -> tuple[Step, ...]:
    """Steps from their JSON list (raises ProjectError for anything else)."""
    if data is None:
        return ()
    if not isinstance(data, list):
        raise ProjectError("the preparation steps must be a list")
    return tuple(Step.from_json(entry) for entry in data)


def usual_order(steps: tuple[Step, ...] | list[Step]) -> tuple[Step, ...]:
    """The steps sorted as in STEP_NAMES (stable for repeated names)."""
    return tuple(sorted(steps, key=lambda s: STEP_NAMES.index(s.name)
                        if s.name in STEP_NAMES else len(STEP_NAMES)))


def apply_steps(diary: Diary, steps: tuple[Step, ...] | list[Step]) -> Diary:
    """A new Diary with the steps applied in the given order (NaN stays NaN)."""
    values = np.array(diary.values, dtype=float, copy=True)
    for step in steps:
        if step.name not in STEP_NAMES:
            raise DataError(f"unknown preparation step '{step.name}' "
                            f"(known: {', '.join(STEP_NAMES)})")
        columns = _columns(diary, step)
        if step.name == "detrend":
            for j in columns:
                values[:, j] = _detrended(values[:, j])
        elif step.name == "prompt_means":
            prompt = np.asarray(diary.prompt, dtype=float)
            if np.isnan(prompt).any():
                raise DataError("prompt-position means cannot be removed: the diary has no "
                                "prompt numbers (import it with a prompt column or timestamps)")
            for j in columns:
                values[:, j] = _centred_by(values[:, j], prompt)
        elif step.name == "weekday_means":
            weekday = weekdays(diary)
            if weekday is None:
                raise DataError("day-of-week means cannot be removed: the days are not dates "
                                "and the diary has no timestamps")
            for j in columns:
                values[:, j] = _centred_by(values[:, j], weekday)
        else:
            for j in columns:
                values[:, j] = _standardized(values[:, j], diary.items[j])
    return replace(diary, values=values)


def describe(steps: tuple[Step, ...] | list[Step]) -> str:
    """The steps in plain words, in order."""
    if not steps:
        return "no preparation (answers as given)"
    return "; then ".join(step.label for step in steps)


# ----------------------------------------------------------------------------- helpers

def _columns(diary: Diary, step: Step) -> list[int]:
    if step.items is None:
        return list(range(diary.n_items))
    missing = [name for name in step.items if name not in diary.items]
    if missing:
        raise DataError(f"preparation step '{STEP_LABELS[step.name]}' names "
                        f"{', '.join(repr(m) for m in missing)}, not an item of the diary")
    return [diary.items.index(name) for name in step.items]


def _detrended(column: np.ndarray) -> np.ndarray:
    """Residuals of the OLS line on the occasion index (answered values only)."""
    out = column.copy()
    ok = ~np.isnan(column)
    if ok.sum() < 2:
        out[ok] = 0.0
        return out
    index = np.flatnonzero(ok).astype(float)
    design = np.column_stack([np.ones(index.size), index - index.mean()])
    coef, *_ = np.linalg.lstsq(design, column[ok], rcond=None)
    out[ok] = column[ok] - design @ coef
    return out


def _centred_by(column: np.ndarray, group: np.ndarray) -> np.ndarray:
    """x minus the mean of its group (over the group's answered values)."""
    out = column.copy()
    ok = ~np.isnan(column)
    for key in np.unique(group[ok]):
        here = ok & (group == key)
        out[here] = column[here] - column[here].mean()
    return out


def _standardized(column: np.ndarray, name: str) -> np.ndarray:
    ok = ~np.isnan(column)
    answers = column[ok]
    if answers.size < 2 or np.ptp(answers) == 0:
        raise DataError(f"item '{name}' cannot be standardized: it has the same value at every "
                        "answered prompt")
    out = column.copy()
    out[ok] = (answers - answers.mean()) / answers.std(ddof=1)
    return out
