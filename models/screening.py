"""Screening a diary before modelling: per-item statistics, stationarity tests, profiles,
and a readiness summary in plain words.

Per item (over its answered prompts):
- mean, SD (divisor n - 1), skewness (adjusted Fisher-Pearson G1 = sqrt(n(n-1))/(n-2) * g1,
  g1 = m3 / m2^1.5), floor and ceiling shares (share of answers at the low / high end of the
  item's scale: as given, e.g. by models.scales, else the observed min and max);
- autocorrelation at lags 1..5 within segments (see `within_segment_acf`);
- a linear time trend: OLS of the answers on the occasion index (the occasion's position in
  the diary, 0, 1, 2, ...; a missed prompt keeps its place, so a gap counts as the prompts
  missed and a night as one step). Slope per occasion, its p-value (t test), the
  standardized slope (slope x SD(index) / SD(answers), the correlation with time) and the
  drift over the diary in SDs (slope x index range / SD);
- the ADF test (constant, lag length by AIC up to a bounded maximum; null: a unit root) and
  the KPSS test (level, automatic lags; null: a stable level), models.unitroot, on one series
  per item: its answered values in diary order with the segments joined end to end and the
  gaps (missed prompts, nights) closed up; remembered per series, so screening the same
  item of the same diary again is free;
- the within-day profile (mean by prompt number) and the day-of-week profile (when the day
  labels are dates or the diary has timestamps); a mean within ROUNDING of the item's scale
  from 0 is rounding error (e.g. after removing the prompt means) and is shown as 0.

The readiness summary counts answered prompts, complete lag-1 windows and windows per free
parameter, compliance by week, and turns rules of thumb into warnings.
"""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import asdict, dataclass, replace

import numpy as np
from scipy.special import stdtr

from lagwise.models.blas import one_blas_thread
from lagwise.models.itemcheck import item_problem
from lagwise.models.diary import Diary
from lagwise.models.errors import DataError
from lagwise.models.numbers import fmt, p_phrase
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.unitroot import adf, cached_by_series, kpss_level
from lagwise.models.windows import lag_windows

ACF_LAGS = 5
ALPHA = 0.05               # level of the ADF and KPSS verdicts
MIN_TEST_ANSWERS = 20      # fewer answers: the ADF/KPSS tests are not run
# Rules of thumb behind the warnings (common practice; not guarantees):
MIN_WINDOWS = 50           # fewer complete lag-1 windows than this: too short for most models
MIN_ITEM_ANSWERS = 50      # an item answered fewer times gives rough screening figures
NEAR_ZERO_SD = 0.05        # SD below this share of the scale range: the item barely varies
STRONG_TREND = 0.2         # |standardized slope| (correlation with time) at least this ...
TREND_P = 0.01             # ... and p below this: a strong trend
END_SHARE = 0.25           # a quarter or more of answers at one end of the scale: floor/ceiling
LOW_COMPLIANCE = 0.5       # weeks with fewer answered prompts than this share
ROUNDING = 1e-9            # profile means this close to 0 (times the scale's largest end) are 0
KPSS_TABLE = (0.01, 0.10)  # the p-values the KPSS table covers (models.unitroot)
CAUTION = ("These warnings follow rules of thumb, not guarantees: a diary that passes them can "
           "still be too short for a given model, and one that fails them may still be usable.")

WEEKDAYS = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")
_ISO_DATE = re.compile(r"\d{4}-\d{2}-\d{2}")


# ----------------------------------------------------------------------------- values

@dataclass(frozen=True)
class Trend:
    """OLS line answers = intercept + slope * occasion index; p for the slope (t test)."""

    slope: float | None
    intercept: float | None
    p: float | None
    standardized: float | None
    drift_sd: float | None

    def line(self, index: np.ndarray) -> np.ndarray:
        """The fitted line at occasion indices `index` (NaN when there is no line)."""
        index = np.asarray(index, dtype=float)
        if self.slope is None or self.intercept is None:
            return np.full(index.shape, np.nan)
        return self.intercept + self.slope * index


@dataclass(frozen=True)
class UnitTest:
    """One stationarity test: statistic, p-value, lags used, whether it rejects, in words.

    p_bounded: the p-value lies at the edge of the test's table (KPSS tabulates p only
    between 0.01 and 0.10), so the true p is smaller (or larger) than the one shown.
    """

    name: str
    statistic: float | None
    p: float | None
    lags: int | None
    rejects: bool | None
    verdict: str
    p_bounded: bool = False

    @property
    def edge_sentence(self) -> str | None:
        """A plain sentence on a p at the edge of the test's table (None when it is not)."""
        low, high = KPSS_TABLE
        side = f"smaller than {low:.2f}" if (self.p or 0) <= low else f"larger than {high:.2f}"
        return (f"The {self.name} p-value lies at the edge of the test's table ({low:.2f} to "
                f"{high:.2f}): the true p is {side}." if self.p_bounded else None)


@dataclass(frozen=True)
class Profile:
    """Item means by a grouping (prompt number or weekday): labels, means, answer counts."""

    labels: tuple[str, ...]
    means: tuple[float | None, ...]
    counts: tuple[int, ...]


@dataclass(frozen=True)
class ItemScreen:
    """Screening figures of one item (see the module docstring for definitions)."""

    name: str
    answered: int
    missing: int
    mean: float | None
    sd: float | None
    low: float | None
    high: float | None
    floor_share: float | None
    ceiling_share: float | None
    skewness: float | None
    acf: tuple[float | None, ...]
    acf_pairs: tuple[int, ...]
    trend: Trend
    adf: UnitTest
    kpss: UnitTest
    reading: str
    within_day: Profile | None
    weekday: Profile | None

    @property
    def acf_bound(self) -> tuple[float | None, ...]:
        """1.96 / sqrt(pairs) per lag: the usual approximate 95% band of a white-noise ACF."""
        return tuple(1.96 / np.sqrt(n) if n else None for n in self.acf_pairs)

    @property
    def flags(self) -> tuple[str, ...]:
        """Short words for this item's warnings (e.g. "strong trend", "barely varies")."""
        return tuple(flag for flag, _ in item_findings(self))

    def to_json(self) -> dict:
        out = _clean(asdict(self))
        out["adf_p"] = out["adf"]["p"]
        out["kpss_p"] = out["kpss"]["p"]
        return out


@dataclass(frozen=True)
class WeekCompliance:
    """Prompts scheduled and answered in one week (week 1 starts on the first day)."""

    week: int
    first_day: str
    last_day: str
    scheduled: int
    answered: int
    fraction: float | None


@dataclass(frozen=True)
class Readiness:
    """Is the diary long and clean enough? Counts, compliance by week, warnings in words."""

    occasions: int
    answered: int
    complete_windows: int
    partial_windows: int
    n_free: int | None
    windows_per_parameter: float | None
    compliance_by_week: tuple[WeekCompliance, ...]
    warnings: tuple[str, ...]
    caution: str = CAUTION

    def to_json(self) -> dict:
        return _clean(asdict(self))


@dataclass(frozen=True)
class Screening:
    """The screening of a whole diary: one ItemScreen per item and the readiness summary."""

    items: tuple[ItemScreen, ...]
    readiness: Readiness

    def item(self, name: str) -> ItemScreen:
        for screen in self.items:
            if screen.name == name:
                return screen
        raise KeyError(name)

    def to_json(self) -> dict:
        return {"items": {s.name: s.to_json() for s in self.items},
                "readiness": self.readiness.to_json()}


# ----------------------------------------------------------------------------- entry points

def screen_diary(diary: Diary, scales: dict[str, tuple[float, float]] | None = None,
                 n_free: int | None = None, monitor: Monitor | None = None) -> Screening:
    """Screen every item of `diary` and summarise readiness.

    scales: item -> (low, high) ends of its answer scale (default: observed min and max).
    n_free: free parameters of the current specification (for windows per parameter).
    """
    scales = scales or {}
    with one_blas_thread():  # long vector products: threaded BLAS only waits on two cores
        weekday = weekdays(diary)
        screens = []
        for j, name in enumerate(diary.items):
            checkpoint(monitor, j / (diary.n_items + 1), f"Screening item {name}")
            screens.append(screen_item(name, diary.values[:, j], diary.segment, diary.prompt,
                                       weekday, scales.get(name)))
        checkpoint(monitor, diary.n_items / (diary.n_items + 1), "Readiness")
        return Screening(items=tuple(screens), readiness=readiness(diary, screens, n_free))


def screening_json(screening: Screening) -> dict:
    """Per item {"trend": {"slope", "p"}, "adf_p", "kpss_p", "acf": [lag 1..5], "scale": [low,
    high]}, the figures `lagwise inspect --json` adds to each item (None where undefined)."""
    out = {}
    for screen in screening.items:
        out[screen.name] = {
            "trend": {"slope": _finite(screen.trend.slope), "p": _finite(screen.trend.p)},
            "adf_p": _finite(screen.adf.p),
            "kpss_p": _finite(screen.kpss.p),
            "acf": [_finite(r) for r in screen.acf],
            "scale": [_finite(screen.low), _finite(screen.high)],
        }
    return out


def screen_item(name: str, column: np.ndarray, segment: np.ndarray, prompt: np.ndarray,
                weekday: np.ndarray | None, scale: tuple[float, float] | None = None) -> ItemScreen:
    """Screening figures of one item column (NaN = unanswered) in diary order."""
    column = np.asarray(column, dtype=float)
    answered = ~np.isnan(column)
    x = column[answered]
    n = int(x.size)
    mean = float(x.mean()) if n else None
    sd = float(x.std(ddof=1)) if n > 1 else None
    if scale is not None:
        low, high = float(scale[0]), float(scale[1])
        if not low < high:
            raise DataError(f"item '{name}': the low end of its scale ({low:g}) must be below "
                            f"the high end ({high:g})")
    else:
        low, high = (float(x.min()), float(x.max())) if n else (None, None)
    unit = max(abs(low), abs(high)) if low is not None else 0.0
    floor = float(np.isclose(x, low).mean()) if n and low is not None else None
    ceiling = float(np.isclose(x, high).mean()) if n and high is not None else None
    acf, pairs = within_segment_acf(column, segment, ACF_LAGS)
    adf_test, kpss_test = stationarity_tests(x)
    return ItemScreen(
        name=name, answered=n, missing=int(column.size - n), mean=mean, sd=sd, low=low, high=high,
        floor_share=floor, ceiling_share=ceiling, skewness=skewness(x), acf=acf, acf_pairs=pairs,
        trend=linear_trend(column), adf=adf_test, kpss=kpss_test,
        reading=combined_reading(adf_test, kpss_test),
        within_day=_profile(column, prompt, _prompt_label, unit),
        weekday=None if weekday is None else _profile(column, weekday, _weekday_label, unit, 7),
    )


# ----------------------------------------------------------------------------- statistics

def skewness(x: np.ndarray) -> float | None:
    """Adjusted Fisher-Pearson skewness G1 = sqrt(n(n-1))/(n-2) * m3/m2^1.5 (None: n < 3, SD 0)."""
    n = x.size
    if n < 3 or np.ptp(x) == 0:
        return None
    dev = x / np.max(np.abs(x))       # G1 does not change with the scale: no underflow
    dev = dev - dev.mean()
    m2, m3 = np.mean(dev ** 2), np.mean(dev ** 3)
    return float(np.sqrt(n * (n - 1)) / (n - 2) * m3 / m2 ** 1.5)


def within_segment_acf(column: np.ndarray, segment: np.ndarray,
                       nlags: int = ACF_LAGS) -> tuple[tuple[float | None, ...], tuple[int, ...]]:
    """Autocorrelation at lags 1..nlags from pairs inside one segment.

    With the n answered values x, their mean m and S_0 = sum (x - m)^2, and for lag h the
    n_h pairs (t, t-h) answered and in one segment with S_h = sum (x_t - m)(x_{t-h} - m):
        r_h = (S_h / n_h) / (S_0 / n) * (n - h) / n.
    The mean pair product over the variance, times the shrinkage (n - h)/n of the usual
    (biased) estimator; for one complete segment n_h = n - h and r_h = S_h / S_0, exactly
    statsmodels' acf(x, fft=False). None when a lag has no pair or the item does not vary.
    Returns the coefficients and the pair counts n_h.
    """
    column = np.asarray(column, dtype=float)
    segment = np.asarray(segment)
    answered = ~np.isnan(column)
    n = int(answered.sum())
    out: list[float | None] = []
    counts: list[int] = []
    if n == 0:
        return (None,) * nlags, (0,) * nlags
    dev = column - column[answered].mean()
    s0 = float(np.sum(dev[answered] ** 2))
    for h in range(1, nlags + 1):
        ok = answered[h:] & answered[:-h] & (segment[h:] == segment[:-h])
        n_h = int(ok.sum())
        counts.append(n_h)
        if n_h == 0 or s0 <= 0:
            out.append(None)
            continue
        s_h = float(np.sum(dev[h:][ok] * dev[:-h][ok]))
        out.append((s_h / n_h) / (s0 / n) * (n - h) / n)
    return tuple(out), tuple(counts)


def linear_trend(column: np.ndarray) -> Trend:
    """OLS of the answered values on the occasion index; two-sided t-test p for the slope
    (common practice: t = slope / se, n - 2 degrees of freedom)."""
    column = np.asarray(column, dtype=float)
    index = np.flatnonzero(~np.isnan(column)).astype(float)
    x = column[~np.isnan(column)]
    none = Trend(None, None, None, None, None)
    if x.size < 3:
        return none
    di, dx = index - index.mean(), x - x.mean()
    slope = float(di @ dx / (di @ di))
    intercept = float(x.mean() - slope * index.mean())
    sd_x = float(x.std(ddof=1))
    if sd_x <= 0:
        return Trend(slope, intercept, None, None, None)
    resid = dx - slope * di
    se = np.sqrt(float(resid @ resid) / (x.size - 2) / float(di @ di))
    p = 2.0 * stdtr(x.size - 2, -abs(slope / se)) if se > 0 else 0.0
    return Trend(slope=slope, intercept=intercept, p=_finite(p),
                 standardized=slope * float(index.std(ddof=1)) / sd_x,
                 drift_sd=slope * float(index[-1] - index[0]) / sd_x)


@cached_by_series
def stationarity_tests(x: np.ndarray) -> tuple[UnitTest, UnitTest]:
    """ADF (constant, AIC lag length) and KPSS (level, automatic lags) on answered values in
    time order, gaps closed up (models.unitroot). Not run with fewer than MIN_TEST_ANSWERS
    answers or no variation. Both statistics are unchanged by a change of scale, so the series
    is standardized first (values near the ends of floating point stay computable)."""
    x = np.asarray(x, dtype=float)
    top = float(np.max(np.abs(x))) if x.size else 0.0
    if top > 0 and np.isfinite(top):
        x = x / top
        x = (x - x.mean()) / (x.std() or 1.0)
    if x.size < MIN_TEST_ANSWERS or not np.isfinite(top) or np.ptp(x) == 0:
        why = (f"not run: only {x.size} answer{'' if x.size == 1 else 's'} "
               f"(needs {MIN_TEST_ANSWERS})"
               if x.size < MIN_TEST_ANSWERS else "not run: the item does not vary")
        return (UnitTest("ADF", None, None, None, None, why),
                UnitTest("KPSS", None, None, None, None, why))
    try:
        stat, p, lags = adf(x)
        rejects = bool(p < ALPHA)
        adf_test = UnitTest("ADF", stat, p, lags, rejects, (
            "rejects a unit root: no sign of a random walk" if rejects
            else "cannot rule out a unit root: the level may wander like a random walk"))
    except ValueError as error:  # too short, or collinear regressors
        adf_test = UnitTest("ADF", None, None, None, None, f"not run: {error}")
    stat, p, lags, bounded = kpss_level(x)
    rejects = bool(p < ALPHA)
    words = ("rejects a stable level: the level seems to drift or shift" if rejects
             else "no evidence against a stable level")
    kpss_test = UnitTest("KPSS", stat, p, lags, rejects, words, bounded)
    if bounded:
        kpss_test = replace(kpss_test, verdict=f"{words}. {kpss_test.edge_sentence}")
    return adf_test, kpss_test


def combined_reading(adf_test: UnitTest, kpss_test: UnitTest) -> str:
    """The usual joint reading of ADF (null: unit root) and KPSS (null: stationary)."""
    if adf_test.rejects is None or kpss_test.rejects is None:
        return "not tested"
    if adf_test.rejects and not kpss_test.rejects:
        return "looks stationary"
    if not adf_test.rejects and not kpss_test.rejects:
        return "inconclusive: neither test decides (the series may be too short)"
    if adf_test.rejects and kpss_test.rejects:
        return "mixed: maybe a trend or a shift in level"
    return "looks non-stationary"


# ----------------------------------------------------------------------------- time helpers

def weekdays(diary: Diary) -> np.ndarray | None:
    """Weekday (0 = Monday .. 6 = Sunday, -1 unknown) of every occasion, or None when unknown.

    A day's weekday comes from its label when the label is a date (YYYY-MM-DD), otherwise
    from the first timestamp of that day.
    """
    per_day = np.full(diary.n_days, -1, dtype=np.int64)
    for d, label in enumerate(diary.day_labels):
        if _ISO_DATE.fullmatch(label.strip()):
            try:
                per_day[d] = dt.date.fromisoformat(label.strip()).weekday()
            except ValueError:
                pass
    if diary.time is not None:
        stamps = np.asarray(diary.time, dtype="datetime64[ns]")
        known = np.flatnonzero(~np.isnat(stamps))
        days, first = np.unique(np.asarray(diary.day)[known], return_index=True)
        monday = np.datetime64("1970-01-05", "D")  # weekday counted from a known Monday
        weekday = (stamps[known[first]].astype("datetime64[D]") - monday).astype(np.int64) % 7
        open_days = per_day[days] < 0
        per_day[days[open_days]] = weekday[open_days]
    if (per_day < 0).all():
        return None
    return per_day[np.asarray(diary.day)]


def compliance_by_week(diary: Diary) -> tuple[WeekCompliance, ...]:
    """Scheduled and answered prompts per 7-day block from the first day (calendar days when
    the day labels are dates, otherwise day numbers in order)."""
    dates = _day_dates(diary.day_labels)
    if dates is not None:
        week_of_day = np.array([(d - dates[0]).days // 7 for d in dates], dtype=np.int64)
    else:
        week_of_day = np.arange(diary.n_days) // 7
    week = week_of_day[np.asarray(diary.day)]
    scheduled = np.bincount(week, minlength=week_of_day.max() + 1)
    answered = np.bincount(week, weights=diary.answered, minlength=scheduled.size)
    first = np.full(scheduled.size, diary.n_days)
    np.minimum.at(first, week_of_day, np.arange(diary.n_days))
    last = np.full(scheduled.size, -1)
    np.maximum.at(last, week_of_day, np.arange(diary.n_days))
    out = []
    for w in np.flatnonzero(scheduled):
        total, done = int(scheduled[w]), int(answered[w])
        out.append(WeekCompliance(week=int(w) + 1, first_day=diary.day_labels[first[w]],
                                  last_day=diary.day_labels[last[w]], scheduled=total,
                                  answered=done, fraction=done / total))
    return tuple(out)


# ----------------------------------------------------------------------------- readiness

def readiness(diary: Diary, screens: list[ItemScreen] | tuple[ItemScreen, ...],
              n_free: int | None = None) -> Readiness:
    """Counts and plain-word warnings from the item screens (rules of thumb, see constants)."""
    windows = lag_windows(diary, 1)
    complete = windows.n_complete
    per_parameter = complete / n_free if n_free else None
    weeks = compliance_by_week(diary)
    answered = int(diary.answered.sum())
    notes = []
    if complete < MIN_WINDOWS:
        notes.append(f"Only {complete} complete lag windows (pairs of consecutive prompts in one "
                     f"segment with every item answered); about {MIN_WINDOWS} or more is a usual "
                     "minimum even for a small model.")
    if per_parameter is not None:  # the estimators' rule; loaded only when a model is known
        from lagwise.models.objective import MIN_WINDOWS_PER_PARAMETER
    if per_parameter is not None and per_parameter < MIN_WINDOWS_PER_PARAMETER:
        notes.append(f"{per_parameter:.1f} complete lag windows per free parameter ({complete} for "
                     f"{n_free}); fewer than about {MIN_WINDOWS_PER_PARAMETER:g} gives unstable "
                     "estimates (windows with some missing values add a little): free fewer "
                     "paths or use fewer states.")
    if answered < MIN_ITEM_ANSWERS:
        notes.append(f"Only {answered} answered prompts in the whole diary.")
    low = [w for w in weeks if w.fraction is not None and w.fraction < LOW_COMPLIANCE]
    if low and len(weeks) > 1:
        listed = ", ".join(f"{w.week} ({100 * w.fraction:.0f}%)" for w in low)
        notes.append(f"Fewer than half of the prompts were answered in week {listed}.")
    for s in screens:
        notes += [sentence for _, sentence in item_findings(s)]
    for j, name in enumerate(diary.items):   # what fit would refuse (models.conditioning)
        problem = item_problem(name, diary.values[:, j])
        if problem:
            notes.append(f"{problem[0].upper()}{problem[1:]}.")
    return Readiness(occasions=diary.n_occasions, answered=answered, complete_windows=complete,
                     partial_windows=windows.n_partial, n_free=n_free,
                     windows_per_parameter=per_parameter, compliance_by_week=weeks,
                     warnings=tuple(notes))


def item_findings(s: ItemScreen) -> list[tuple[str, str]]:
    """(short flag, sentence) for each rule of thumb the item fails."""
    notes = []
    if s.answered < MIN_ITEM_ANSWERS:
        notes.append(("few answers",
                      f"Item '{s.name}' has only {s.answered} answers: its figures are rough."))
    span = (s.high - s.low) if s.high is not None and s.low is not None else None
    if s.sd is not None and (s.sd == 0 or (span and s.sd < NEAR_ZERO_SD * span)):
        notes.append(("barely varies", f"Item '{s.name}' barely varies (SD {s.sd:.3g}): it "
                      "carries little information about changing states."))
    elif s.sd is not None and s.sd > 0:
        if s.floor_share is not None and s.floor_share >= END_SHARE:
            notes.append(("floor effect", f"Item '{s.name}': {100 * s.floor_share:.0f}% of "
                          "answers at the low end of the scale (a floor effect)."))
        if s.ceiling_share is not None and s.ceiling_share >= END_SHARE:
            notes.append(("ceiling effect", f"Item '{s.name}': {100 * s.ceiling_share:.0f}% of "
                          "answers at the high end of the scale (a ceiling effect)."))
    t = s.trend
    if is_strong_trend(t):
        direction = "rises" if t.slope > 0 else "falls"
        notes.append(("strong trend", f"Item '{s.name}' {direction} over the diary (by about "
                      f"{abs(t.drift_sd):.1f} SD, {p_phrase(t.p)}): consider removing its "
                      "linear trend."))
    if s.reading == "looks non-stationary":
        notes.append(("non-stationary", f"Item '{s.name}' looks non-stationary (ADF "
                      f"{p_phrase(s.adf.p)}, KPSS {p_phrase(s.kpss.p)})."))
    return notes


def is_strong_trend(t: Trend) -> bool:
    """|standardized slope| >= STRONG_TREND and p < TREND_P."""
    return (t.standardized is not None and t.p is not None
            and abs(t.standardized) >= STRONG_TREND and t.p < TREND_P)


# ----------------------------------------------------------------------------- text

def format_screening(screening: Screening) -> str:
    """Readable text of a screening: one line per item, then readiness and warnings."""
    width = max(8, *(len(s.name) for s in screening.items))
    lines = [f"  {'item':<{width}}   acf1   trend/occ  trend p   ADF p  KPSS p  reading"]
    for s in screening.items:
        acf1 = f"{s.acf[0]:>6.2f}" if s.acf and s.acf[0] is not None else f"{'-':>6}"
        slope = f"{s.trend.slope:>10.4f}" if s.trend.slope is not None else f"{'-':>10}"
        kp = fmt(s.kpss.p, "p") + ("*" if s.kpss.p_bounded else "")
        lines.append(f"  {s.name:<{width}} {acf1} {slope}  {fmt(s.trend.p, 'p'):>7}  "
                     f"{fmt(s.adf.p, 'p'):>6}  {kp:>6}  {s.reading}")
    r = screening.readiness
    lines += ["", f"  answered prompts: {r.answered} of {r.occasions}    "
                  f"complete lag windows: {r.complete_windows}"]
    if r.windows_per_parameter is not None:
        lines[-1] += f"    per free parameter: {r.windows_per_parameter:.1f}"
    if any(s.kpss.p_bounded for s in screening.items):
        lines.append("  * KPSS p at the edge of its table (0.01 to 0.10)")
    if r.warnings:
        lines += ["", "  warnings"] + [f"    - {w}" for w in r.warnings] + [f"  {r.caution}"]
    return "\n".join(lines)


# ----------------------------------------------------------------------------- helpers

def _profile(column: np.ndarray, group: np.ndarray, label, unit: float,
             size: int | None = None) -> Profile | None:
    """Means of the answered values by group (within ROUNDING * unit of 0: 0); None when
    fewer than two groups are known."""
    group = np.asarray(group, dtype=float)
    known = ~np.isnan(group) & (group >= 0)
    keys = np.unique(group[known]) if size is None else np.arange(size, dtype=float)
    if np.unique(group[known]).size < 2:
        return None
    means, counts = [], []
    for key in keys:
        here = column[known & (group == key) & ~np.isnan(column)]
        counts.append(int(here.size))
        mean = float(here.mean()) if here.size else None
        means.append(0.0 if mean is not None and abs(mean) <= ROUNDING * unit else mean)
    return Profile(labels=tuple(label(k) for k in keys), means=tuple(means), counts=tuple(counts))


def _prompt_label(key: float) -> str:
    return str(int(key)) if float(key).is_integer() else f"{key:g}"


def _weekday_label(key: float) -> str:
    return WEEKDAYS[int(key)]


def _day_dates(labels: tuple[str, ...]) -> list[dt.date] | None:
    if not labels or not all(_ISO_DATE.fullmatch(x.strip()) for x in labels):
        return None
    try:
        return [dt.date.fromisoformat(x.strip()) for x in labels]
    except ValueError:
        return None


def _finite(value) -> float | None:
    if value is None:
        return None
    value = float(value)
    return value if np.isfinite(value) else None


def _clean(value):
    """JSON-ready copy: tuples to lists, non-finite floats to None."""
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if isinstance(value, (float, np.floating)):
        return _finite(value)
    if isinstance(value, np.integer):
        return int(value)
    return value

