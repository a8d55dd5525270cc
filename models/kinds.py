"""The kinds of parameter a Lagwise model has: one enumeration for the engine, the report,
the JSON (the values are the JSON strings) and the window (the labels).

Direction rule (JSON "from"/"to"): a loading goes from its state to its item, a lagged path
from the state at t-l to the state at t, a covariance from the earlier-listed to the
later-listed state; variances and intercepts name their item or state twice.
"""

from __future__ import annotations

from enum import StrEnum


class Kind(StrEnum):
    """A parameter kind; `title` heads its table in reports, `label` names one row of it."""

    LOADING = "loading"
    INTERCEPT = "intercept"
    UNIQUE = "unique"
    UNIQUE_AUTOCORRELATION = "unique_autocorrelation"
    INERTIA = "inertia"
    CROSS_LAGGED = "cross_lagged"
    LAG2 = "lag2"
    INNOVATION = "innovation"
    PARTIAL_CORRELATION = "partial_correlation"
    FIRST_COPY = "first_copy"
    LATENT_INTERCEPT = "latent_intercept"

    @property
    def title(self) -> str:
        return _TITLES[self]

    @property
    def label(self) -> str:
        return _LABELS[self]


_TITLES = {
    Kind.LOADING: "Loadings (state -> item)",
    Kind.INTERCEPT: "Intercepts",
    Kind.UNIQUE: "Unique variances",
    Kind.UNIQUE_AUTOCORRELATION: "Lag-1 autocorrelation of unique parts",
    Kind.INERTIA: "Inertia (state at t-1 -> same state at t)",
    Kind.CROSS_LAGGED: "Cross-lagged effects (state at t-1 -> other state at t)",
    Kind.LAG2: "Lag-2 paths (state at t-2 -> state at t)",
    Kind.INNOVATION: "Innovations (variances and covariances)",
    Kind.PARTIAL_CORRELATION: "Partial correlations of innovations",
    Kind.FIRST_COPY: "Covariance of the oldest window copies (first-copy-free)",
    Kind.LATENT_INTERCEPT: "Latent intercepts of the later window copies (first-copy-free)",
}
_LABELS = {
    Kind.LOADING: "Loading",
    Kind.INTERCEPT: "Intercept",
    Kind.UNIQUE: "Unique variance",
    Kind.UNIQUE_AUTOCORRELATION: "Unique autocorrelation",
    Kind.INERTIA: "Inertia",
    Kind.CROSS_LAGGED: "Cross-lagged effect",
    Kind.LAG2: "Lag-2 effect",
    Kind.INNOVATION: "Innovation (co)variance",
    Kind.PARTIAL_CORRELATION: "Innovation partial correlation",
    Kind.FIRST_COPY: "Oldest-copy covariance",
    Kind.LATENT_INTERCEPT: "Latent intercept",
}
LAGGED_KINDS = (Kind.INERTIA, Kind.CROSS_LAGGED, Kind.LAG2)


def parameter_words(kind: str, from_: str, to: str, lag: int = 0) -> str:
    """One parameter in words, its item or state named once where it has one (the window's
    parameter rows, the comparison of runs)."""
    kind = Kind(kind)
    if kind == Kind.LOADING:
        return f"{from_} → {to}"
    if kind in LAGGED_KINDS:
        return f"{from_} (t-{lag or 1}) → {to}"
    if kind == Kind.INTERCEPT:
        return f"{to}: intercept"
    if kind == Kind.UNIQUE:
        return f"{to}: unique variance"
    if kind == Kind.UNIQUE_AUTOCORRELATION:
        return f"{to}: unique part carried over (t-1)"
    if kind == Kind.INNOVATION:
        return f"{to}: variance" if from_ == to else f"{from_} with {to}: covariance"
    if kind == Kind.PARTIAL_CORRELATION:
        return f"{from_} with {to}: partial correlation"
    if kind == Kind.LATENT_INTERCEPT:
        return f"{to}: latent intercept (later copies)"
    return f"{to}: variance (oldest copy)" if from_ == to else \
        f"{from_} with {to}: covariance (oldest copy)"
