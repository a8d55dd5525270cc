"""Many people in one file: a long table (every person's rows stacked, one column naming the
person) becomes a study, one diary per person.

Each person's rows go through the same `DiaryRecipe` on their own, so every person gets their
own time grid, days, segments, compliance and screening, exactly as if their rows were a file
of their own. A person whose rows cannot be a diary is kept with the reason (one line), so
the rest of the study goes on. People keep the order in which they first appear in the file.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from lagwise.models import names
from lagwise.models.diary import Diary
from lagwise.models.errors import DataError, LagwiseError
from lagwise.models.readers import drop_empty_rows, read_table
from lagwise.models.recipe import DiaryRecipe
from lagwise.models.screening import Screening, screen_diary


@dataclass(frozen=True, eq=False)
class PersonDiary:
    """One person of a study: their diary, or why their rows are not one (`problem`)."""

    person: str
    diary: Diary | None
    problem: str | None = None

    @property
    def compliance(self) -> float | None:
        """Share of scheduled prompts answered (at least one item), None without a diary."""
        if self.diary is None or self.diary.n_occasions == 0:
            return None
        return float(self.diary.answered.mean())

    def screening(self, recipe: DiaryRecipe, n_free: int | None = None) -> Screening:
        """The item screening of this person's diary (models.screening)."""
        if self.diary is None:
            raise DataError(f"person {self.person}: {self.problem}")
        return screen_diary(self.diary, recipe.item_scales(self.diary), n_free)


@dataclass(frozen=True, eq=False)
class Study:
    """The people of a long table, in file order, and the column that names them."""

    person_column: str
    people: tuple[PersonDiary, ...]

    def __len__(self) -> int:
        return len(self.people)


def person_label(cell: object) -> str:
    """A person's name as text: whole numbers without a decimal point (7.0 -> "7")."""
    if isinstance(cell, (float, np.floating)) and float(cell).is_integer():
        return str(int(cell))
    return str(cell).strip()


def study_from_frame(table: pd.DataFrame, recipe: DiaryRecipe, person: str,
                     source: str = "") -> Study:
    """One diary per value of column `person` (rows without a person are refused)."""
    label = source or "the table"
    table = drop_empty_rows(table.set_axis([str(c) for c in table.columns], axis=1))
    if person not in table.columns:
        raise DataError(f"{label}: there is no person column '{person}'")
    if recipe.items is not None and person in recipe.items:
        raise DataError(f"{label}: the person column '{person}' cannot also be an item")
    if person in recipe.time.columns():
        raise DataError(f"{label}: the person column '{person}' cannot also be a time column")
    labels = table[person].map(lambda c: "" if pd.isna(c) else person_label(c))
    if (labels == "").any():
        first = table.index[(labels == "").to_numpy()][0]
        raise DataError(f"{label}: row {first} has no {person}; every row needs a person")
    refused = next(filter(None, map(names.problem, dict.fromkeys(labels))), None)
    if refused:
        raise DataError(f"{label}: a name in the person column '{person}' {refused}")
    rest = table.drop(columns=[person])
    people = []
    for name in dict.fromkeys(labels):
        rows = rest[(labels == name).to_numpy()]
        try:
            diary = recipe.diary(rows, source=f"{label}, {person} {name}")
        except LagwiseError as error:
            people.append(PersonDiary(name, None, str(error)))
        else:
            people.append(PersonDiary(name, diary))
    return Study(person, tuple(people))


def read_study(path: str | Path, recipe: DiaryRecipe, person: str) -> Study:
    """Read a long diary file (only the columns the recipe and the person column use) and
    split it into people."""
    columns = recipe.columns()
    table = read_table(path, None if columns is None else columns + (person,))
    return study_from_frame(table, recipe, person, source=str(path))
