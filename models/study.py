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

from lagwise.models import jsonread as jr
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


def _person_labels(table: pd.DataFrame, person: str, label: str) -> pd.Series:
    """Each row's person as text; DataError for a missing column, an empty cell or an unsafe
    name."""
    if person not in table.columns:
        raise DataError(f"{label}: there is no person column '{person}'")
    labels = table[person].map(lambda c: "" if pd.isna(c) else person_label(c))
    if (labels == "").any():
        first = table.index[(labels == "").to_numpy()][0]
        raise DataError(f"{label}: row {first} has no {person}; every row needs a person")
    refused = next(filter(None, map(names.problem, dict.fromkeys(labels))), None)
    if refused:
        raise DataError(f"{label}: a name in the person column '{person}' {refused}")
    return labels


def person_rows(table: pd.DataFrame, person_column: str, person: str,
                source: str = "") -> pd.DataFrame:
    """The rows of one person, without the person column (DataError when there are none)."""
    table = drop_empty_rows(table.set_axis([str(c) for c in table.columns], axis=1))
    labels = _person_labels(table, person_column, source or "the table")
    rows = table[(labels == person).to_numpy()].drop(columns=[person_column])
    if rows.empty:
        raise DataError(f"{source or 'the table'}: no rows of {person_column} {person}")
    return rows


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
    labels = _person_labels(table, person, label)
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


def with_steps(study: Study, steps: tuple) -> Study:
    """The study with preparation steps (models.preparation) applied to every person's diary;
    a person whose diary the steps cannot be applied to keeps the reason."""
    if not steps:
        return study
    from lagwise.models.preparation import apply_steps   # loads statistics modules

    people = []
    for entry in study.people:
        try:
            diary = None if entry.diary is None else apply_steps(entry.diary, steps)
        except LagwiseError as error:
            people.append(PersonDiary(entry.person, None, str(error)))
        else:
            people.append(PersonDiary(entry.person, diary, entry.problem))
    return Study(study.person_column, tuple(people))


def read_study(path: str | Path, recipe: DiaryRecipe, person: str) -> Study:
    """Read a long diary file (only the columns the recipe and the person column use) and
    split it into people."""
    columns = recipe.columns()
    table = read_table(path, None if columns is None else columns + (person,))
    return study_from_frame(table, recipe, person, source=str(path))


@dataclass(frozen=True)
class StudyChoice:
    """What a project keeps of its study: the person column, the person shown, and the
    folder of the last "Estimate every person" (None: none yet)."""

    person_column: str
    person: str
    batch_folder: str | None = None

    def to_json(self) -> dict:
        return {"person_column": self.person_column, "person": self.person,
                "batch_folder": self.batch_folder}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "StudyChoice":
        """A choice from `to_json` output; FieldError names a malformed field."""
        return cls(**jr.read_fields(doc, where, (
            jr.field("person_column", jr.name),
            jr.field("person", jr.name),
            jr.field("batch_folder", jr.text, None, null=True, limit=jr.MAX_TEXT),
        ), closed=True))
