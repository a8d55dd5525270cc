"""Simulated people for the batch tests: each person's diary drawn from the two-state model
of tests/two_state_model.py with a seed of their own, and the long table that stacks them
(a person column, then day, prompt and the items)."""

from __future__ import annotations

import pandas as pd

from lagwise.models.diary import TimeSettings
from lagwise.models.recipe import DiaryRecipe
from lagwise.models.simulate import simulate_diary
from two_state_model import SPEC, TRUE

RECIPE = DiaryRecipe.of(SPEC.items, TimeSettings(mode="grid", day="day", prompt="prompt"))


def person_table(seed: int, days: int = 10, prompts: int = 6) -> pd.DataFrame:
    """One person's rows as their own file would hold them (missed prompts left out)."""
    diary = simulate_diary(SPEC, **TRUE, days=days, prompts_per_day=prompts, p_missed=0.1,
                           seed=seed)
    table = pd.DataFrame(diary.values, columns=diary.items)
    table.insert(0, "prompt", diary.prompt.astype(int))
    table.insert(0, "day", diary.day + 1)
    return table[table[list(diary.items)].notna().any(axis=1)].reset_index(drop=True)


def people_tables(n: int, **size) -> dict[str, pd.DataFrame]:
    """Person name -> their own rows, for `n` people."""
    return {f"P{i:02d}": person_table(100 + i, **size) for i in range(n)}


def stacked(tables: dict[str, pd.DataFrame]) -> pd.DataFrame:
    """The long file: every person's rows under a "person" column, people one after another."""
    return pd.concat([t.assign(person=name)[["person", *t.columns]] for name, t in tables.items()],
                     ignore_index=True)
