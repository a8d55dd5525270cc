"""A planned diary design, and one simulated diary of it.

A design is the number of days, prompts per day, the expected share of prompts answered and
its pattern over the day, the night rule and the estimator:
- "random": every prompt is answered with the same probability;
- "late": prompts later in the day are missed more often: prompt b of n is missed with
  probability m 2b / (n + 1) (m the expected share missed; the shares rise linearly and
  average m, capped at 1, so above m = (n + 1) / 2n the average falls a little short);
- night_gap None: each day starts afresh from the stationary distribution (the simulator's
  rule); a number g: the states carry over g unanswered prompts of night into the next day,
  and the `exact` estimator joins the days over the same gap.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lagwise.models.diary import Diary
from lagwise.models.errors import SpecError
from lagwise.models.estimators import FitOptions
from lagwise.models.limits import NIGHT_GAP, PROMPTS_PER_DAY, Limit
from lagwise.models.plantruth import Truth
from lagwise.models.simulate import simulate_diary

PATTERNS: tuple[str, ...] = ("random", "late")
DAYS = Limit("number of days", 2, 3650, "days")
ANSWERED = Limit("share of prompts answered", 0.0, 1.0, whole=False, above=True)


@dataclass(frozen=True)
class Design:
    """One diary design to plan (module docstring); checked when made."""

    days: int
    prompts: int
    answered: float = 0.75
    pattern: str = "random"
    estimator: str = "stationary"
    night_gap: int | None = None

    def __post_init__(self) -> None:
        DAYS.check(self.days)
        PROMPTS_PER_DAY.check(self.prompts)
        ANSWERED.check(self.answered)
        if self.prompts < 2:
            raise SpecError("A plan needs at least 2 prompts a day (lagged effects link "
                            "prompts of the same day).")
        if self.pattern not in PATTERNS:
            raise SpecError(f"Unknown pattern of missed prompts '{self.pattern}' "
                            f"(choose {' or '.join(PATTERNS)}).")
        if self.night_gap is not None:
            NIGHT_GAP.check(self.night_gap)
        self.options   # refuses an estimator that does not take the night rule

    @property
    def options(self) -> FitOptions:
        return FitOptions(self.estimator, night_gap=self.night_gap)

    def missed_shares(self) -> np.ndarray:
        """(prompts,) probability that each prompt of a day is missed."""
        m = 1.0 - self.answered
        if self.pattern == "random":
            return np.full(self.prompts, m)
        b = np.arange(1, self.prompts + 1)
        return np.clip(m * 2.0 * b / (self.prompts + 1), 0.0, 1.0)

    def words(self) -> str:
        """'40 days of 6 prompts and 75% answered'."""
        late = ", more missed late in the day" if self.pattern == "late" else ""
        return (f"{self.days} days of {self.prompts} prompts and "
                f"{round(100 * self.answered)}% answered{late}")

    def to_json(self) -> dict:
        return {"days": self.days, "prompts": self.prompts, "answered": self.answered,
                "pattern": self.pattern, "estimator": self.estimator,
                "night_gap": self.night_gap}


def simulate(truth: Truth, design: Design, rng: np.random.Generator,
             lag2: np.ndarray | None = None) -> Diary:
    """One diary of `design` drawn from `truth` (with the lag-2 effects `lag2`, k x k,
    added to the truth when given)."""
    spec, lagged = truth.spec, list(truth.lagged)
    if lag2 is not None:
        spec, lagged = spec.with_lags(2), lagged + [np.asarray(lag2, dtype=float)]
    gap = design.night_gap or 0
    per_day = design.prompts + gap
    days, prompts = (1, design.days * per_day) if design.night_gap is not None else \
        (design.days, design.prompts)
    diary = simulate_diary(spec, loadings=truth.loadings, intercepts=truth.intercepts,
                           unique=truth.unique, lagged=lagged, innovation=truth.innovation,
                           days=days, prompts_per_day=prompts,
                           unique_autocorrelation=truth.unique_autocorrelation, seed=rng)
    values = diary.values.reshape(design.days, per_day, -1)[:, :design.prompts].copy()
    missed = rng.random((design.days, design.prompts)) < design.missed_shares()
    values[missed] = np.nan
    day = np.repeat(np.arange(design.days), design.prompts)
    return Diary(items=truth.spec.items, values=values.reshape(day.size, -1),
                 segment=day.copy(), day=day,
                 day_labels=tuple(f"day {i + 1}" for i in range(design.days)),
                 prompt=np.tile(np.arange(1, design.prompts + 1, dtype=float), design.days),
                 time=None, source="simulated")
