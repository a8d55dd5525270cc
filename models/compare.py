"""Two or more runs side by side: fit figures, every parameter, and likelihood-ratio tests.

`compare(runs)` lines the runs up in the order given. Fit figures (the calibrated test's
first, where the runs have one; a figure no run has is left out) and parameters (aligned by
kind, from, to and lag) are rows with one value per run and, for every run after the first,
its difference from the first. A run estimated from other data or other preparation steps
than the first (another data fingerprint, models.runs) is marked not comparable and takes
part in no test.

For each nested pair (same data, same estimator and settings that shape the likelihood, same
items, one run's free parameters a strict subset of the other's) the likelihood-ratio test
(common practice): LR = 2 (logL_larger - logL_smaller), df = the difference in free
parameters, p = chi-square(df) upper tail (scipy.stats.chi2.sf). With the exact estimator
logL is the likelihood of the series and p is exact in large samples. With a window
estimator logL is the window pseudo-likelihood (overlapping windows treated as independent),
and LR is scaled by the difference test of Satorra & Bentler (2001, "A scaled difference
chi-square test statistic for moment structure analysis", Psychometrika 66:507-514) from
the two runs' calibrated fit tests (models.robust): with d0, d1 the models' degrees of
freedom and c0, c1 their scaling factors (smaller model first),
    c_d = (d0 c0 - d1 c1) / (d0 - d1),   LR / c_d ~ chi-square(d0 - d1);
where c_d is not positive (it can be in small samples) or a run has no calibrated test, LR
is left unscaled and its p is marked approximate.
"""

from __future__ import annotations

from dataclasses import dataclass

from scipy.stats import chi2 as chi2_dist

from lagwise.models.errors import ProjectError
from lagwise.models.kinds import Kind, parameter_words
from lagwise.models.numbers import fmt, p_phrase
from lagwise.models.results import FitIndices, FitResult
from lagwise.models.runs import Run

# (label, FitIndices field (scaled.*: of its calibrated test), fmt style) of the fit figures
# compared, the calibrated ones first as on the Fit tab
FIGURES = (("Calibrated chi-square", "scaled.chi2", "number"),
           ("Calibrated df", "scaled.df", "number"), ("Calibrated p", "scaled.p", "p"),
           ("Calibrated RMSEA", "scaled.rmsea", "number"),
           ("Calibrated CFI", "scaled.cfi", "number"), ("Calibrated TLI", "scaled.tli", "number"),
           ("Chi-square", "chi2", "number"), ("Degrees of freedom", "df", "int"),
           ("p (chi-square)", "p", "p"), ("RMSEA", "rmsea", "number"), ("CFI", "cfi", "number"),
           ("TLI", "tli", "number"), ("SRMR", "srmr", "number"),
           ("Log-likelihood", "loglik", "number"), ("AIC", "aic", "number"),
           ("BIC", "bic", "number"), ("Free parameters", "n_free", "int"),
           ("Windows or prompts used", "n_obs", "int"))
APPROXIMATE = ("approximate: the window pseudo-likelihood treats overlapping windows as "
               "independent")


@dataclass(frozen=True)
class Row:
    """One compared figure or parameter: a value per run (None: the run has none)."""

    section: str                  # "Fit" or the parameter kind's title
    label: str
    values: tuple[float | None, ...]
    style: str = "number"         # models.numbers.fmt style

    @property
    def differences(self) -> tuple[float | None, ...]:
        """Each later run's value minus the first run's (None when either is missing)."""
        first = self.values[0]
        return tuple(None if first is None or v is None else v - first for v in self.values[1:])


@dataclass(frozen=True)
class LikelihoodRatio:
    """The likelihood-ratio test of a nested pair of runs; p is that of the scaled statistic
    when there is one (window estimators), else of LR."""

    smaller: str
    larger: str
    lr: float
    df: int
    p: float
    exact: bool                   # False: window pseudo-likelihood
    scaling: float | None = None  # c_d of the scaled difference test (window estimators)

    @property
    def scaled(self) -> float | None:
        return None if self.scaling is None else self.lr / self.scaling

    @property
    def sentence(self) -> str:
        head = (f"Likelihood-ratio test, {self.smaller} within {self.larger}: LR = "
                f"{fmt(self.lr)} on {self.df} df")
        if self.exact:
            return f"{head}, {p_phrase(self.p)}."
        if self.scaling is None:
            return f"{head}, {p_phrase(self.p)} ({APPROXIMATE})."
        return (f"{head}; scaled for overlapping windows (Satorra-Bentler difference test, "
                f"scaling {fmt(self.scaling)}): {fmt(self.scaled)}, {p_phrase(self.p)}.")


@dataclass(frozen=True)
class Comparison:
    names: tuple[str, ...]
    comparable: tuple[bool, ...]      # per run: same data fingerprint as the first run
    figures: tuple[Row, ...]
    parameters: tuple[Row, ...]
    tests: tuple[LikelihoodRatio, ...]
    notes: tuple[str, ...]

    def header(self) -> list[str]:
        """Column titles of `table`."""
        first = self.names[0]
        return (["Section", "Figure or parameter", *self.names]
                + [f"{name} - {first}" for name in self.names[1:]])

    def table(self) -> list[list[str]]:
        """Every row as display text (models.numbers.fmt), columns as in `header`."""
        return [[row.section, row.label, *(fmt(v, row.style) for v in row.values),
                 *(fmt(d, "number" if row.style == "p" else row.style)
                   for d in row.differences)]
                for row in self.figures + self.parameters]


def compare(runs: tuple[Run, ...] | list[Run]) -> Comparison:
    """The runs side by side (see the module docstring); ProjectError for fewer than two."""
    runs = tuple(runs)
    if len(runs) < 2:
        raise ProjectError("Choose at least two runs to compare.")
    first = runs[0]
    comparable = tuple(run.fingerprint == first.fingerprint for run in runs)
    notes = [f"{run.name} was estimated from other data or other preparation steps than "
             f"{first.name}: not comparable, no test." for run, same in zip(runs, comparable)
             if not same]
    notes += [f"{run.name} did not converge: its figures may mislead." for run in runs
              if not run.result.converged]
    figures = tuple(Row("Fit", label, tuple(_number(_figure(run.result.fit, key)) for run in runs),
                        style) for label, key, style in FIGURES)
    figures = tuple(row for row in figures if any(v is not None for v in row.values))
    tests = tuple(test for i, a in enumerate(runs) for b in runs[i + 1:]
                  if (test := likelihood_ratio(a, b)) is not None)
    return Comparison(tuple(run.name for run in runs), comparable, figures,
                      _parameter_rows(runs), tests, tuple(notes))


def likelihood_ratio(a: Run, b: Run) -> LikelihoodRatio | None:
    """The test of a nested pair (either order), or None when the two are not nested."""
    if not same_likelihood(a, b):
        return None
    free_a, free_b = _free(a.result), _free(b.result)
    if free_a < free_b:
        smaller, larger = a, b
    elif free_b < free_a:
        smaller, larger = b, a
    else:
        return None
    fit_s, fit_l = smaller.result.fit, larger.result.fit
    lr = max(2.0 * (fit_l.loglik - fit_s.loglik), 0.0)   # as models.lag2check
    df = fit_l.n_free - fit_s.n_free
    exact = fit_l.exact and fit_s.exact
    c = None if exact else difference_scaling(fit_s, fit_l)
    return LikelihoodRatio(smaller.name, larger.name, float(lr), int(df),
                           float(chi2_dist.sf(lr if c is None else lr / c, df)), exact=exact,
                           scaling=c)


def difference_scaling(smaller: FitIndices, larger: FitIndices) -> float | None:
    """c_d = (d0 c0 - d1 c1) / (d0 - d1) of the Satorra-Bentler scaled difference test (module
    docstring), or None when either fit has no calibrated test or c_d is not positive."""
    if smaller.scaled is None or larger.scaled is None or smaller.df <= larger.df:
        return None
    c = ((smaller.df * smaller.scaled.scaling - larger.df * larger.scaled.scaling)
         / (smaller.df - larger.df))
    return float(c) if c > 0 else None


def same_likelihood(a: Run, b: Run) -> bool:
    """True when the two runs' log-likelihoods are of the same data: one fingerprint, one
    estimator, the same window depth, missing-data handling and night gap, and the same
    items and observations."""
    ra, rb = a.result, b.result
    oa, ob = ra.options, rb.options
    return (a.fingerprint == b.fingerprint and ra.estimator == rb.estimator
            and ra.depth == rb.depth and oa.missing == ob.missing
            and oa.night_gap == ob.night_gap and set(ra.items) == set(rb.items)
            and ra.fit.n_obs == rb.fit.n_obs and ra.fit.exact == rb.fit.exact)


def _free(result: FitResult) -> frozenset:
    return frozenset((p.kind, p.from_, p.to, p.lag) for p in result.free_parameters)


def _parameter_rows(runs: tuple[Run, ...]) -> tuple[Row, ...]:
    """One row per parameter of any run (aligned by kind, from, to, lag), in kind order and
    then in the order the runs list them."""
    tables = [{(p.kind, p.from_, p.to, p.lag): p.estimate for p in run.result.parameters}
              for run in runs]
    keys = list(dict.fromkeys(key for table in tables for key in table))
    order = {kind: i for i, kind in enumerate(Kind)}
    keys.sort(key=lambda key: order[Kind(key[0])])
    return tuple(Row(Kind(kind).title, parameter_words(kind, from_, to, lag),
                     tuple(_number(table.get((kind, from_, to, lag))) for table in tables))
                 for kind, from_, to, lag in keys)


def _figure(fit: FitIndices, key: str):
    """A FitIndices field, or ("scaled.x") a field of its calibrated test (None without one)."""
    owner, _, name = key.rpartition(".")
    holder = getattr(fit, owner) if owner else fit
    return None if holder is None else getattr(holder, name)


def _number(value) -> float | None:
    return None if value is None else float(value)
