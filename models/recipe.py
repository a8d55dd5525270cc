"""How a raw table becomes a diary: one recipe used by the window, the command line and
project files.

A recipe names the item columns (None: every numeric column that is not a time column), how
rows are placed in time (models.diary.TimeSettings), the answers that mean "missing", and
for a grid diary the number of prompts scheduled per day (None: the highest prompt number
seen), and the answer scales the user stated per item (models.scales; an item without one
has its scale guessed from its answers). `diary(table)` applies it (models.timegrid.diary_from_frame); `read(path)` reads the
file first (models.readers.read_table).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from lagwise.models import names
from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import DataError
from lagwise.models.readers import read_table
from lagwise.models.scales import Scale, item_scales
from lagwise.models.timegrid import diary_from_frame


@dataclass(frozen=True)
class DiaryRecipe:
    items: tuple[str, ...] | None = None
    time: TimeSettings = TimeSettings()
    missing_codes: tuple[str | float, ...] = ()
    prompts_per_day: int | None = None
    scales: tuple[tuple[str, Scale], ...] = ()

    @classmethod
    def of(cls, items: Sequence[str] | None = None, time: TimeSettings = TimeSettings(),
           missing_codes: Iterable[object] = (), prompts_per_day: int | None = None,
           scales: Mapping[str, Scale] | None = None) -> "DiaryRecipe":
        """A recipe from any sequences (stored as tuples)."""
        return cls(None if items is None else tuple(str(i) for i in items), time,
                   tuple(missing_codes), prompts_per_day,  # type: ignore[arg-type]
                   tuple((scales or {}).items()))

    def item_scales(self, diary: Diary) -> dict[str, Scale]:
        """Item -> (low, high) of its answer scale: as stated, or guessed (models.scales)."""
        return item_scales(diary.items, diary.values, dict(self.scales))

    def diary(self, table: pd.DataFrame, source: str = "") -> Diary:
        """The diary of `table`; DataError naming the column and row when it cannot be one, or
        an item column whose name holds a control character (models.names)."""
        diary = diary_from_frame(table, self.items, self.time, self.missing_codes, source=source,
                                 prompts_per_day=self.prompts_per_day)
        for item in diary.items:
            refused = names.problem(str(item))
            if refused:
                raise DataError(f"The name of an item column {refused}.")
        return diary

    def columns(self) -> tuple[str, ...] | None:
        """The file columns the recipe uses (None: every column, when the items are not named)."""
        if self.items is None:
            return None
        return tuple(dict.fromkeys(self.items + self.time.columns()))

    def read(self, path: str | Path) -> Diary:
        """Read a diary file (CSV/TSV/XLSX/SAV/DTA), only the columns it uses, and apply the
        recipe."""
        return self.diary(read_table(path, self.columns()), source=str(path))


def load_diary(path: str | Path, items: Sequence[str] | None = None,
               time: TimeSettings = TimeSettings(), missing_codes: Iterable[object] = (),
               prompts_per_day: int | None = None) -> Diary:
    """Read a diary file and place its rows in time: `DiaryRecipe.of(...).read(path)`."""
    return DiaryRecipe.of(items, time, missing_codes, prompts_per_day).read(path)
