"""Warnings about one fit, each with a stable code and a plain-word text.

A `Flag` is its text (it is a str, so reports and the JSON's "flags" list stay plain text)
with a `code` that the window and tests look up; codes never change once released.
"""

from __future__ import annotations

from enum import StrEnum


class FlagCode(StrEnum):
    NOT_CONVERGED = "not_converged"
    FEW_WINDOWS = "few_windows"
    NOT_IDENTIFIED = "information_not_positive_definite"
    SATURATED_NOT_CONVERGED = "saturated_not_converged"
    NOT_STATIONARY = "not_stationary"
    NEARLY_NOT_STATIONARY = "nearly_not_stationary"
    HEYWOOD = "heywood"
    ZERO_INNOVATION = "zero_innovation_variance"
    PARTIAL_BOUNDARY = "partial_correlation_boundary"
    DRIFT_NOT_STABLE = "drift_not_stable"
    UNKNOWN = ""  # read from a file written before flags had codes


class Flag(str):
    """A warning's text, carrying its `code` (a FlagCode)."""

    code: FlagCode

    def __new__(cls, code: FlagCode | str, text: str) -> "Flag":
        flag = super().__new__(cls, text)
        flag.code = FlagCode(code)
        return flag

    def __reduce__(self):
        return (Flag, (str(self.code), str(self)))


def few_windows(n: int, n_free: int, per_parameter: float) -> Flag:
    return Flag(FlagCode.FEW_WINDOWS,
                f"Only {n} usable windows for {n_free} free parameters (fewer than about "
                f"{per_parameter:g} per parameter): estimates will be unstable.")


def not_identified() -> Flag:
    return Flag(FlagCode.NOT_IDENTIFIED,
                "The information matrix is not positive definite: the model may not be "
                "identified; standard errors are not available for all parameters.")


def saturated_not_converged() -> Flag:
    return Flag(FlagCode.SATURATED_NOT_CONVERGED,
                "The saturated window model did not converge: chi-square-based indices are approximate.")


def stationarity(radius: float) -> list[Flag]:
    """A flag when the lagged paths are not, or only barely, stationary."""
    if radius >= 1.0:
        return [Flag(FlagCode.NOT_STATIONARY,
                     f"Not stationary: the spectral radius of the lagged paths is {radius:.3f} (1 or "
                     "more), so the states would drift without bound; these estimates do not "
                     "describe a stable process.")]
    if radius > 0.99:
        return [Flag(FlagCode.NEARLY_NOT_STATIONARY,
                     f"Nearly non-stationary: spectral radius {radius:.4f}, at the stationarity boundary.")]
    return []


def drift_stability(largest_real_part: float) -> list[Flag]:
    """A flag when the drift matrix has an eigenvalue whose real part is not negative."""
    if largest_real_part < 0.0:
        return []
    return [Flag(FlagCode.DRIFT_NOT_STABLE,
                 f"Not stable: the drift matrix has an eigenvalue with real part "
                 f"{largest_real_part:.3g} (0 or more), so the states would not return to their "
                 "levels; these estimates do not describe a stable process.")]


def heywood(item: str) -> Flag:
    return Flag(FlagCode.HEYWOOD, f"Boundary (Heywood) estimate: the unique variance of '{item}' is 0.")


def zero_innovation(state: str) -> Flag:
    return Flag(FlagCode.ZERO_INNOVATION, f"Boundary estimate: the innovation variance of '{state}' is 0.")


def partial_boundary(a: str, b: str) -> Flag:
    return Flag(FlagCode.PARTIAL_BOUNDARY, f"Boundary estimate: partial correlation {a}-{b} is near +-1.")
