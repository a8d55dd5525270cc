"""What a continuous-time fit adds to its result: the time settings it used, the drift and
diffusion matrices with their standard errors, and the discrete effects B(D) = expm(A D) over
a grid of intervals with delta-method 95% bands (the Jacobian of expm by
scipy.linalg.expm_frechet, the covariance of the free drift entries from the fit).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from scipy.linalg import expm, expm_frechet

from lagwise.models import jsonread as jr
from lagwise.models.estimators import INTERVAL_UNITS
from lagwise.models.kinds import Kind

if TYPE_CHECKING:
    from lagwise.models.results import FitResult

Z95 = 1.959963984540054   # the normal 97.5% quantile (common practice)
GRID_HOURS = 8.0          # effects_by_interval: intervals from 0 to 8 hours by default
GRID_POINTS = 33


@dataclass(frozen=True)
class ContinuousTime:
    """The interval unit of the drift, the night handling, and the diary's median, shortest
    and longest interval between prompts (in `unit`)."""

    unit: str
    night: str
    median_interval: float
    shortest: float
    longest: float

    def to_json(self) -> dict:
        return {"unit": self.unit, "night": self.night, "median_interval": self.median_interval,
                "shortest": self.shortest, "longest": self.longest}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "ContinuousTime | None":
        """Settings from `to_json` output (None for null); FieldError names a bad field."""
        if doc is None:
            return None
        return cls(**jr.read_fields(doc, where, (
            jr.field("unit", jr.choice, choices=tuple(INTERVAL_UNITS)),
            jr.field("night", jr.choice, choices=("restart", "carry")),
            jr.field("median_interval", jr.number),
            jr.field("shortest", jr.number),
            jr.field("longest", jr.number),
        )))


@dataclass(frozen=True, eq=False)
class MatrixEstimate:
    """A (k, k) matrix of estimates with standard errors and 95% intervals (NaN where fixed)."""

    estimate: np.ndarray
    se: np.ndarray

    @property
    def lower(self) -> np.ndarray:
        return self.estimate - Z95 * self.se

    @property
    def upper(self) -> np.ndarray:
        return self.estimate + Z95 * self.se

    def to_json(self) -> dict:
        return {"estimate": self.estimate.tolist(), "se": self.se.tolist(),
                "lower": self.lower.tolist(), "upper": self.upper.tolist()}


def matrix_estimate(result: "FitResult", kind: Kind) -> MatrixEstimate:
    """The drift (row = the state that changes) or diffusion (symmetric) of a result."""
    states = list(result.states)
    k = len(states)
    est, se = np.zeros((k, k)), np.full((k, k), np.nan)
    for p in result.table(kind):
        i, j = states.index(p.to), states.index(p.from_)
        cells = [(i, j), (j, i)] if kind == Kind.DIFFUSION else [(i, j)]
        for r, c in cells:
            est[r, c] = p.estimate
            se[r, c] = np.nan if p.se is None else p.se
    return MatrixEstimate(est, se)


@dataclass(frozen=True, eq=False)
class EffectsByInterval:
    """B(D) for each interval D of `intervals` (unit of the fit): values, lower, upper
    (intervals, k, k), row = state at t + D, column = state at t."""

    intervals: np.ndarray
    values: np.ndarray
    lower: np.ndarray
    upper: np.ndarray

    def to_json(self) -> dict:
        return {"intervals": self.intervals.tolist(), "values": self.values.tolist(),
                "lower": self.lower.tolist(), "upper": self.upper.tolist()}


def default_grid(unit: str) -> np.ndarray:
    """GRID_POINTS intervals from 0 to GRID_HOURS hours, in `unit`."""
    return np.linspace(0.0, GRID_HOURS / INTERVAL_UNITS[unit], GRID_POINTS)


def effects_by_interval(result: "FitResult", intervals: np.ndarray | None = None
                        ) -> EffectsByInterval:
    """B(D) = expm(A D) over `intervals` (default `default_grid`) with delta-method 95% bands:
    Var B_ij(D) = J V J', J the derivative of B_ij(D) by the free drift entries
    (dB = D L(A D, dA), L the Frechet derivative of expm), V their covariance."""
    grid = default_grid(result.continuous.unit) if intervals is None else np.asarray(intervals, float)
    drift = matrix_estimate(result, Kind.DRIFT).estimate
    states = list(result.states)
    free = result.free_parameters
    rows = [n for n, p in enumerate(free) if p.kind == Kind.DRIFT]
    cov = (np.full((len(rows), len(rows)), np.nan) if result.covariance is None
           else result.covariance[np.ix_(rows, rows)])
    k = drift.shape[0]
    values = np.empty((grid.size, k, k))
    sd = np.zeros((grid.size, k, k))
    for g, d in enumerate(grid):
        values[g] = expm(drift * d)
        jac = np.empty((len(rows), k, k))
        for r, n in enumerate(rows):
            e = np.zeros((k, k))
            e[states.index(free[n].to), states.index(free[n].from_)] = d
            jac[r] = expm_frechet(drift * d, e, compute_expm=False)
        flat = jac.reshape(len(rows), -1)
        sd[g] = np.sqrt(np.clip(np.einsum("ri,rs,si->i", flat, cov, flat), 0, None)).reshape(k, k)
    return EffectsByInterval(grid, values, values - Z95 * sd, values + Z95 * sd)


def continuous_json(result: "FitResult") -> dict:
    """The keys a continuous-time fit adds to the result's JSON."""
    return {"drift": matrix_estimate(result, Kind.DRIFT).to_json(),
            "diffusion": matrix_estimate(result, Kind.DIFFUSION).to_json(),
            "effects_by_interval": {**effects_by_interval(result).to_json(),
                                    "unit": result.continuous.unit,
                                    "median_interval": result.continuous.median_interval,
                                    "at_median": result.lagged[0].tolist()}}
