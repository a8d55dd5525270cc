"""The allowed ranges of the numeric settings a user can type.

One `Limit` per setting, used by the engine when a value is made (FitOptions, TimeSettings,
the time grid), by project files when one is read, and by the command line when an option is
parsed, so the same value is refused everywhere with the same words.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass

from lagwise.models.errors import SpecError


@dataclass(frozen=True)
class Limit:
    """A closed range low..high (open at low when `above`), of whole numbers when `whole`."""

    words: str
    low: float
    high: float
    unit: str = ""
    whole: bool = True
    above: bool = False

    def describe(self) -> str:
        """'a whole number from 0 to 50 prompts', 'more than 0 and at most 1e8 minutes'."""
        low, high = _show(self.low), _show(self.high)
        unit = f" {self.unit}" if self.unit else ""
        if self.above:
            return f"more than {low} and at most {high}{unit}"
        kind = "a whole number" if self.whole else "a number"
        return f"{kind} from {low} to {high}{unit}"

    def allows(self, value: object) -> bool:
        if not isinstance(value, numbers.Real) or type(value).__name__.startswith("bool"):
            return False
        if not isinstance(value, numbers.Integral) and (
                not math.isfinite(value) or (self.whole and not float(value).is_integer())):
            return False
        low_ok = value > self.low if self.above else value >= self.low
        return low_ok and value <= self.high

    def check(self, value: object, error: type[Exception] = SpecError):
        """`value` when allowed; otherwise `error` with one plain line."""
        if not self.allows(value):
            raise error(f"The {self.words} should be {self.describe()}, not {value}.")
        return value


def _show(value: float) -> str:
    if float(value).is_integer() and abs(value) < 1e7:
        return str(int(value))
    return f"{value:g}".replace("e+0", "e").replace("e+", "e")


DEPTH = Limit("window depth", 0, 50, "prompts")
NIGHT_GAP = Limit("night gap", 0, 1000, "prompts")
MAX_ITER = Limit("number of optimiser iterations", 1, 10_000_000)
MAX_GAP_MINUTES = Limit("longest gap within a segment", 0, 1e8, "minutes", whole=False,
                        above=True)
PROMPT_SPACING = Limit("prompt spacing", 0, 1e6, "interval units", whole=False, above=True)
PROMPTS_PER_DAY = Limit("number of prompts per day", 1, 1000)
JOBS = Limit("number of worker processes", 1, 1024)
SEED = Limit("seed", 0, 2 ** 63 - 1)

# The estimated working memory of a fit (models.estimators.working_bytes) may be at most this.
MEMORY_BUDGET_BYTES = 4 * 1024 ** 3
