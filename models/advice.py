"""Everything to check before reading a fit, in one list: `fit_warnings`.

One fit can be doubted for three reasons, each judged elsewhere: the estimate itself (its
convergence and its flags, models.flags), the diary's size for this model (the readiness rules
of thumb, models.screening) and the lag-2 check of its lag-1 model (models.lag2check). This
module gathers them into typed warnings (code, short title, plain explanation) that the window
shows in one place, and gives the one-line caution that goes with every view and export.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import StrEnum

from lagwise.models.diary import Diary
from lagwise.models.flags import Flag, FlagCode
from lagwise.models.lag2check import ALPHA, Lag2Check, in_model, lag1_version
from lagwise.models.numbers import fmt
from lagwise.models.results import FitResult
from lagwise.models.screening import Readiness, readiness


class AdviceCode(StrEnum):
    """Codes of the warnings that do not come from the fit's own flags."""

    DATA_READINESS = "data_readiness"
    LAG2_INDICATED = "lag2_indicated"
    LAG2_FITS_FLAGGED = "lag2_fits_flagged"


@dataclass(frozen=True)
class Advice:
    """One warning about a fit: a stable code, a short title and a plain explanation."""

    code: FlagCode | AdviceCode
    title: str
    explanation: str


# title, and what the flag means for the reader (after the flag's own sentence)
_FLAG_WORDS = {
    FlagCode.NOT_CONVERGED: (
        "The estimation did not converge",
        "The optimiser stopped before it reached the best estimates, so every number may still "
        "change: treat them as provisional. Free fewer paths or use fewer states, then estimate "
        "again."),
    FlagCode.FEW_WINDOWS: (
        "Few lag windows for this model",
        "With few windows per free parameter the estimates would differ a lot in another stretch "
        "of the same person's diary. Free fewer paths or use fewer states."),
    FlagCode.NOT_IDENTIFIED: (
        "The model may not be identified",
        "The data cannot tell some parameters apart, so their values and standard errors are "
        "not trustworthy. Look for a state with too few items or paths that say the same thing."),
    FlagCode.SATURATED_NOT_CONVERGED: (
        "Fit figures are approximate",
        "The model every fit figure is compared with could not be estimated exactly, so the "
        "chi-square test, RMSEA, CFI and TLI are rough."),
    FlagCode.NOT_STATIONARY: (
        "The lagged paths are not stationary",
        "A process with these paths would drift away instead of settling back after a rise: "
        "inertias and responses cannot be read as a stable person's dynamics."),
    FlagCode.NEARLY_NOT_STATIONARY: (
        "The lagged paths are at the edge of stationarity",
        "The states would settle back only very slowly; estimates this close to the edge are "
        "often pulled there by a trend or a change during the diary (see the Data page)."),
    FlagCode.HEYWOOD: (
        "Boundary estimate (Heywood case)",
        "An item whose unique variance is 0 would be measured without any error, which rarely "
        "holds: often a sign of too little data or an item assigned to the wrong state."),
    FlagCode.ZERO_INNOVATION: (
        "Boundary estimate: an innovation variance is 0",
        "The state would never change except through its lagged paths; often a sign that the "
        "model has more states or paths than the diary supports."),
    FlagCode.PARTIAL_BOUNDARY: (
        "Boundary estimate: a partial correlation near ±1",
        "Two states move as one; consider merging them into one state."),
    FlagCode.UNKNOWN: ("Warning", ""),
}
_READINESS_TITLE = "The diary is thin for this model (rule of thumb)"
_READINESS_NOTE = ("A rule of thumb from the screening on the Data page, counted for this "
                   "model's items and free parameters; it concerns every estimator.")


def data_readiness(diary: Diary | None, result: FitResult) -> Readiness | None:
    """The readiness of `diary` for the model of `result` (its items and free parameters;
    counts only, no item screening), or None without a diary holding those items."""
    if diary is None or not set(result.items) <= set(diary.items):
        return None
    return readiness(diary.select(result.items), (), n_free=result.fit.n_free)


def fit_warnings(result: FitResult, ready: Readiness | None = None,
                 check: Lag2Check | None = None) -> tuple[Advice, ...]:
    """Every warning about `result`: convergence, the fit's flags, the data readiness (made by
    `data_readiness`) and, when `check` tested this result's lag-1 model, the lag-2 check."""
    out = []
    if not result.converged:
        title, note = _FLAG_WORDS[FlagCode.NOT_CONVERGED]
        said = f"The optimiser reported: {result.message}. " if result.message else ""
        out.append(Advice(FlagCode.NOT_CONVERGED, title, said + note))
    if not result.stationary and not result.flagged(FlagCode.NOT_STATIONARY):  # older files
        out.append(_from_flag(Flag(FlagCode.NOT_STATIONARY, f"The spectral radius of the lagged "
                                   f"paths is {fmt(result.spectral_radius)} (1 or more).")))
    out += [_from_flag(flag) for flag in result.flags]
    if ready is not None and ready.warnings:   # one warning, each finding in its explanation
        out.append(Advice(AdviceCode.DATA_READINESS, _READINESS_TITLE,
                          " ".join((*ready.warnings, _READINESS_NOTE))))
    if check is not None and check.restricted.spec == lag1_version(result.spec):
        out += _lag2_warnings(result, check)
    return tuple(out)


def all_clear(ready: Readiness | None) -> str:
    """What an empty `fit_warnings` list means, naming only what was checked."""
    data = ("; the diary has enough prompts and lag windows for the model's free parameters"
            if ready is not None else "")
    return ("No warnings about this fit: the estimation converged, no estimate is on a "
            f"boundary and the lagged paths are stationary{data}.")


def caution_line(result: FitResult) -> str:
    """The result's cautions as one line (for exported tables and the window's caution line)."""
    return "Caution: " + " ".join(result.cautions)


def _from_flag(flag: Flag) -> Advice:
    code = getattr(flag, "code", FlagCode.UNKNOWN)
    title, note = _FLAG_WORDS.get(code, _FLAG_WORDS[FlagCode.UNKNOWN])
    return Advice(code, title, f"{flag} {note}".strip())


def _lag2_warnings(result: FitResult, check: Lag2Check) -> list[Advice]:
    out = []
    missing = [t for t in check.indicated if not in_model(result.spec, t)]
    if missing or (not check.indicated and check.lr_p < ALPHA and result.spec.lags < 2):
        out.append(Advice(AdviceCode.LAG2_INDICATED, "The lag-2 check: lag 1 may not be enough",
                          f"{check.verdict} The lagged paths of this model may then be biased; "
                          "see the Lag-2 check tab."))
    fits = (("The lag-1 model", check.restricted), ("The model with lag-2 paths", check.extended))
    shaky = [f"{name}: {flag}" for name, fitted in fits for flag in fitted.flags]
    shaky += [f"{name} did not converge." for name, fitted in fits if not fitted.converged]
    if shaky:
        out.append(Advice(AdviceCode.LAG2_FITS_FLAGGED, "The lag-2 check's own fits are flagged",
                          "The check refits the model on windows of three prompts, which are "
                          "fewer. " + " ".join(shaky) + " Read its tests as rough."))
    return out
