"""The estimators, declared once, and the estimator settings (`FitOptions`) checked against them.

Each estimator states its name (the command line's and the JSON's), its label and help text
(the window, the command line, reports), whether it uses lag windows, which optional settings
it takes and which missing-data handling it offers, and the objective it maximises
(`objective` names a class with `build(diary, spec, options, monitor)`; it is looked up when
a fit starts, so this module stays at the bottom of the import graph). The rest of the
engine asks the registry instead of comparing estimator names.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass, fields, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from lagwise.models import jsonread as jr
from lagwise.models.errors import FieldError, SpecError
from lagwise.models.limits import DEPTH, MAX_ITER, MEMORY_BUDGET_BYTES, NIGHT_GAP, PROMPT_SPACING

if TYPE_CHECKING:  # type hints only: these modules import this one
    from lagwise.models.diary import Diary
    from lagwise.models.progress import Monitor
    from lagwise.models.spec import ModelSpec


@dataclass(frozen=True)
class Setting:
    """An optional estimator setting: its FitOptions field, words and command-line flag."""

    field: str
    words: str
    flag: str


@dataclass(frozen=True)
class MissingHandling:
    name: str
    label: str   # the window's list
    short: str   # one phrase in reports and on the Fit tab


@dataclass(frozen=True)
class Estimator:
    """One estimator (see the module docstring)."""

    name: str
    label: str
    short: str
    help: str
    uses_windows: bool
    free_first_copies: bool
    missing: tuple[str, ...]        # offered handling of missed prompts; the first is the default
    errors: tuple[str, ...]         # standard errors it offers; the first is the default
    settings: tuple[str, ...]       # optional FitOptions fields it takes
    objective: str                  # "module:Class"
    continuous: bool = False        # drift and diffusion instead of lagged paths and innovations

    def build(self, diary: "Diary", spec: "ModelSpec", options: "FitOptions",
              monitor: "Monitor | None" = None) -> Any:
        """The objective of this estimator for `diary` and `spec`; SpecError, before anything
        is allocated, when its arrays would need more than MEMORY_BUDGET_BYTES."""
        check_memory(diary, spec, options)
        module, name = self.objective.split(":")
        return getattr(importlib.import_module(module), name).build(diary, spec, options, monitor)


SETTINGS = {s.field: s for s in (
    Setting("depth", "a window depth", "--depth"),
    Setting("night_gap", "a night gap", "--night-gap"),
    Setting("interval_unit", "an interval unit", "--interval-unit"),
    Setting("night", "a night handling", "--night"),
    Setting("prompt_spacing", "a prompt spacing", "--prompt-spacing"),
)}
INTERVAL_UNITS = {"minutes": 1.0 / 60.0, "hours": 1.0, "days": 24.0}   # in hours
NIGHTS = ("restart", "carry")
ERRORS = {
    "robust": "robust (sandwich): overlapping windows and dependence within a day allowed for",
    "model": "model-based (inverse information)",
}
MISSING = {m.name: m for m in (
    MissingHandling("fiml", "Use every answer (full information)",
                    "full information (every answered item used)"),
    MissingHandling("listwise", "Complete lag windows only (listwise)", "complete windows only"),
)}
_WINDOWS = "lagwise.models.objective:WindowObjective"
ESTIMATORS = {e.name: e for e in (
    Estimator(
        "stationary", "Stationary lag windows (recommended start)", "stationary lag windows",
        "Cuts the diary into short lag windows of consecutive prompts and fits them all at once, "
        "assuming the person's dynamics stay the same throughout. Fast and reliable. The windows "
        "overlap, so its fit figures (chi-square, AIC, BIC) are approximate.",
        uses_windows=True, free_first_copies=False, missing=("fiml", "listwise"),
        errors=("robust", "model"), settings=("depth",), objective=_WINDOWS),
    Estimator(
        "first-copy-free", "Lag windows, first copy free (no stationarity assumed)",
        "lag windows, first copy free",
        "The same lag windows without assuming a stable process: the oldest prompt of each "
        "window is left free. A useful cross-check of the stationary estimate; it needs more "
        "windows.",
        uses_windows=True, free_first_copies=True, missing=("fiml", "listwise"),
        errors=("robust", "model"), settings=("depth",), objective=_WINDOWS),
    Estimator(
        "exact", "Exact (Kalman filter, whole series)", "exact likelihood (Kalman filter)",
        "Follows the whole series prompt by prompt with the Kalman filter: every answered prompt "
        "counts, missed prompts are bridged, and the log-likelihood, AIC and BIC are exact, so "
        "they compare models properly. Also gives each state's score at every prompt. Slower; "
        "starts from the stationary estimate.",
        uses_windows=False, free_first_copies=False, missing=("fiml",), errors=("model",),
        settings=("night_gap",), objective="lagwise.models.exact:ExactObjective"),
    Estimator(
        "continuous-time", "Continuous time (Kalman filter, unequal intervals)",
        "continuous-time likelihood (Kalman filter)",
        "Treats the states as changing continuously: a drift matrix says how fast each state "
        "returns to its level and pushes the others, so prompts at unequal intervals are "
        "handled exactly (the effect over any interval follows from the drift). Needs the "
        "time of each prompt, or a stated prompt spacing. Exact log-likelihood; slower.",
        uses_windows=False, free_first_copies=False, missing=("fiml",), errors=("model",),
        settings=("interval_unit", "night", "prompt_spacing"),
        objective="lagwise.models.ctobjective:ContinuousObjective", continuous=True),
)}
DEFAULT_ESTIMATOR = "stationary"


def estimator(name: str) -> Estimator:
    """The estimator called `name`; SpecError naming the choices otherwise."""
    try:
        return ESTIMATORS[name]
    except (KeyError, TypeError):
        raise SpecError(f"Unknown estimator '{name}' (choose {', '.join(ESTIMATORS)}).") from None


def _error_choice(value: object, where: str) -> str | None:
    return None if value is None else jr.choice(value, where, tuple(ERRORS))


def _optional_choice(value: object, where: str, choices: tuple[str, ...]) -> str | None:
    return None if value is None else jr.choice(value, where, choices)


def working_bytes(diary: "Diary", spec: "ModelSpec", options: "FitOptions"
                  ) -> tuple[int, str, str]:
    """(bytes, what grows, the setting to lower): an estimate of the largest arrays a fit of `diary` builds.

    Lag windows: the window table (windows x width) and a covariance (width x width) per
    missingness pattern of the windows, each held a few times over. Exact: per filtered
    occasion (the night gap adds `night_gap` empty ones between days) the filter's state and
    answer covariances (state size k x lags + autocorrelated items).
    """
    p, n = len(spec.items), diary.n_occasions
    segment = np.asarray(diary.segment)
    if options.method.uses_windows:
        depth = options.depth if options.depth is not None else spec.lags
        width = (depth + 1) * p
        rows = np.arange(depth, n)
        if depth:
            rows = rows[segment[rows - depth] == segment[rows]]
        row_pattern = _row_ids(~np.isnan(diary.select(spec.items).values))
        shapes = np.column_stack([row_pattern[rows - j] for j in range(depth + 1)])
        patterns = int(_row_ids(shapes).max()) + 1 if rows.size else 0
        size = 8 * (4 * rows.size * width + 3 * patterns * width * width)
        return (size, f"a window depth of {depth}: {rows.size:,} windows of {width} values",
                "a smaller window depth")
    breaks = int((segment[1:] != segment[:-1]).sum()) if n else 0
    occasions = n + breaks * (options.night_gap or 0)
    m = len(spec.states) * spec.lags + len(spec.unique_autocorrelation)
    size = 8 * occasions * (5 * m * m + p * p + 2 * p * m + 4 * (m + p))
    gap = f"a night gap of {options.night_gap} prompts, " if options.night_gap else ""
    return size, f"{gap}{occasions:,} filtered occasions", "a smaller night gap"


def _row_ids(table: np.ndarray) -> np.ndarray:
    """An id per row of a 2-d array, equal for equal rows."""
    rows = np.ascontiguousarray(table)
    keys = rows.view(np.dtype((np.void, rows.dtype.itemsize * rows.shape[1]))).ravel()
    return np.unique(keys, return_inverse=True)[1].ravel()


def check_memory(diary: "Diary", spec: "ModelSpec", options: "FitOptions") -> None:
    """SpecError in one line when `working_bytes` exceeds MEMORY_BUDGET_BYTES."""
    size, what, lower = working_bytes(diary, spec, options)
    if size > MEMORY_BUDGET_BYTES:
        raise SpecError(f"The {options.method.short} estimator would need about "
                        f"{size / 2 ** 30:.1f} GiB of memory for this diary ({what}); at most "
                        f"{MEMORY_BUDGET_BYTES / 2 ** 30:.0f} GiB is allowed: choose {lower}.")


@dataclass(frozen=True)
class FitOptions:
    """Estimator settings, checked against the registry when made.

    estimator: a name in ESTIMATORS. missing: "fiml" (full information over missingness
    patterns; the exact estimator's filter is full information too) or "listwise".
    depth: window depth (window estimators; default the lag order). night_gap (exact only):
    join the days with this many missed prompts between them (the states carry over the
    night) instead of restarting each day. max_iter: optimiser iterations at most.
    se: the standard errors shown, "robust" or "model" (None: the estimator's default, see
    `standard_errors`). Continuous time only: interval_unit (minutes, hours (default) or days:
    the unit of the drift), night ("restart" each day (default) or "carry" the states over
    the real night length, which needs times), prompt_spacing (in interval units, for diaries
    with day and prompt numbers). A setting the estimator does not take is refused with a
    plain message; `for_estimator` switches estimator and drops what the new one does not
    take.
    """

    estimator: str = DEFAULT_ESTIMATOR
    missing: str = "fiml"
    depth: int | None = None
    max_iter: int = 2000
    night_gap: int | None = None
    se: str | None = None
    interval_unit: str | None = None
    night: str | None = None
    prompt_spacing: float | None = None

    def __post_init__(self) -> None:
        method = estimator(self.estimator)
        if self.missing not in MISSING:
            raise SpecError(f"Unknown missing-data handling '{self.missing}' "
                            f"(choose {' or '.join(MISSING)}).")
        if self.missing not in method.missing:
            raise SpecError(f"The {method.short} estimator handles missed prompts itself; "
                            f"--missing {self.missing} needs a lag-window estimator.")
        if self.se is not None and self.se not in method.errors:
            raise SpecError(f"The {method.short} estimator offers {' or '.join(method.errors)} "
                            f"standard errors, not '{self.se}' (--se {self.se} needs a "
                            f"lag-window estimator).")
        for setting in SETTINGS.values():
            if getattr(self, setting.field) is not None and setting.field not in method.settings:
                takers = [e.name for e in ESTIMATORS.values() if setting.field in e.settings]
                raise SpecError(f"The {method.short} estimator does not take {setting.words} "
                                f"({setting.flag} needs --estimator {' or '.join(takers)}).")
        if self.depth is not None:
            DEPTH.check(self.depth)
        if self.night_gap is not None:
            NIGHT_GAP.check(self.night_gap)
        MAX_ITER.check(self.max_iter)
        if self.interval_unit is not None and self.interval_unit not in INTERVAL_UNITS:
            raise SpecError(f"Unknown interval unit '{self.interval_unit}' "
                            f"(choose {', '.join(INTERVAL_UNITS)}).")
        if self.night is not None and self.night not in NIGHTS:
            raise SpecError(f"Unknown night handling '{self.night}' (choose {' or '.join(NIGHTS)}).")
        if self.prompt_spacing is not None:
            PROMPT_SPACING.check(self.prompt_spacing)

    @property
    def method(self) -> Estimator:
        return ESTIMATORS[self.estimator]

    @property
    def standard_errors(self) -> str:
        """The standard errors to show: `se`, or the estimator's default."""
        return self.se or self.method.errors[0]

    def for_estimator(self, name: str) -> "FitOptions":
        """The same settings for estimator `name`, without those it does not take."""
        method = estimator(name)
        drop = {s: None for s in SETTINGS if s not in method.settings}
        missing = self.missing if self.missing in method.missing else method.missing[0]
        se = self.se if self.se in method.errors else None
        return replace(self, estimator=name, missing=missing, se=se, **drop)

    def window_depth(self, spec: "ModelSpec") -> int:
        d = spec.lags if self.depth is None else int(self.depth)
        if d < spec.lags:
            raise SpecError(f"Window depth {d} is below the lag order {spec.lags}.")
        return d

    def to_json(self) -> dict:
        return {f.name: getattr(self, f.name) for f in fields(self)}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "FitOptions":
        """Settings from `to_json` output; FieldError names a malformed field, or the settings
        when the estimator does not take one of them."""
        fields = jr.read_fields(doc, where, (
            jr.field("estimator", jr.choice, choices=tuple(ESTIMATORS)),
            jr.field("missing", jr.choice, choices=tuple(MISSING)),
            jr.field("depth", jr.integer, None, low=DEPTH.low, high=DEPTH.high, null=True),
            jr.field("max_iter", jr.integer, 2000, low=MAX_ITER.low, high=MAX_ITER.high),
            jr.field("night_gap", jr.integer, None, low=NIGHT_GAP.low, high=NIGHT_GAP.high,
                     null=True),
            jr.field("se", _error_choice, None),
            jr.field("interval_unit", _optional_choice, None, choices=tuple(INTERVAL_UNITS)),
            jr.field("night", _optional_choice, None, choices=NIGHTS),
            jr.field("prompt_spacing", jr.number, None, null=True),
        ))
        try:
            return cls(**fields)
        except SpecError as error:
            raise FieldError(where or "options", str(error)) from None
