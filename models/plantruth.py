"""The assumed truth of a study plan: the model a planned diary is simulated from.

Either the estimates of a fitted model (`from_result`), or a model typed in as JSON
(`from_json`), in the states' own units with innovation variances 1:

    {"states": [{"name": "tension", "items": ["tense", "restless"]},
                {"name": "low mood", "items": ["sad"]}],
     "inertia": 0.4,                        (or {"tension": 0.4, "low mood": 0.3})
     "cross_lagged": [{"from": "tension", "to": "low mood", "effect": 0.15}],
     "innovation_correlation": 0.2,         (or [{"between": ["tension", "low mood"], "r": 0.2}])
     "loadings": {"restless": 0.8},         (default 1)
     "reliability": 0.7}                    (or {"tense": 0.8}; see below)

Every lagged path is free in the fitted model (paths not listed are 0 in the truth). An
item's reliability is the share of its variance due to its state, lambda^2 phi /
(lambda^2 phi + theta), so its unique variance is theta = lambda^2 phi (1 - r) / r with phi
the state's stationary variance (common practice). Items of a state with several items
default to 0.7; the item of a single-item state is measured without error unless a
reliability is given (the fitted model then fixes its unique variance at that reliability).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lagwise.models import jsonread as jr
from lagwise.models.errors import FieldError, SpecError
from lagwise.models.kinds import Kind
from lagwise.models.lyapunov import spectral_radius, stationary_covariance
from lagwise.models.results import FitResult
from lagwise.models.spec import ModelSpec, State

RELIABILITY = 0.7      # default reliability of an item of a state with several items
INERTIA = 0.3          # default inertia of every state


@dataclass(frozen=True, eq=False)
class Truth:
    """Parameters to simulate from (models.simulate order and shapes) and the model fitted."""

    spec: ModelSpec
    loadings: np.ndarray
    intercepts: np.ndarray
    unique: np.ndarray
    lagged: tuple[np.ndarray, ...]
    innovation: np.ndarray
    unique_autocorrelation: np.ndarray

    def lagged_paths(self) -> list[tuple[Kind, str, str, int, float]]:
        """The free lagged paths of the fitted model: (kind, from, to, lag, true value)."""
        states = self.spec.state_names
        out = []
        for lag in range(1, self.spec.lags + 1):
            mask = self.spec.path_mask(lag)
            for i, to in enumerate(states):
                for j, fr in enumerate(states):
                    if mask[i, j]:
                        kind = Kind.LAG2 if lag == 2 else (Kind.INERTIA if i == j
                                                            else Kind.CROSS_LAGGED)
                        out.append((kind, fr, to, lag, float(self.lagged[lag - 1][i, j])))
        return out

    def start(self) -> dict[tuple[str, str, str], float]:
        """The true values by (kind, from, to): the start of every refit."""
        spec, items, states = self.spec, self.spec.items, self.spec.state_names
        named: dict[tuple[str, str, str], float] = {}
        for j, s in enumerate(spec.states):
            for it in s.items:
                named[(Kind.LOADING, s.name, it)] = float(self.loadings[items.index(it), j])
        for i, it in enumerate(items):
            named[(Kind.INTERCEPT, it, it)] = float(self.intercepts[i])
            named[(Kind.UNIQUE, it, it)] = float(self.unique[i])
        for kind, fr, to, lag, value in self.lagged_paths():
            named[(kind, fr, to)] = value
        for i in range(spec.k):
            for j in range(i + 1):
                named[(Kind.INNOVATION, states[j], states[i])] = float(self.innovation[i, j])
        return named


def from_result(result: FitResult) -> Truth:
    """The estimates of a fit as the truth (the fitted model is the same model)."""
    d = np.zeros(len(result.items))
    for p in result.table(Kind.UNIQUE_AUTOCORRELATION):
        d[result.items.index(p.from_)] = p.estimate
    if not result.stationary:
        raise SpecError("The fitted model is not stationary, so diaries cannot be simulated "
                        "from it; type the assumed model in instead.")
    return Truth(result.spec, result.loadings.copy(), result.intercepts.copy(),
                 result.unique.copy(), tuple(m.copy() for m in result.lagged),
                 result.innovation.copy(), d)


def from_json(doc: object, where: str = "model") -> Truth:
    """The truth typed in as JSON (module docstring); FieldError names a wrong field."""
    fields = jr.read_fields(doc, where, (
        jr.field("states", jr.tuple_of, item=_state, limit=jr.MAX_STATES),
        jr.field("inertia", _per_name, INERTIA),
        jr.field("cross_lagged", jr.tuple_of, [], item=_effect),
        jr.field("innovation_correlation", _correlations, 0.0),
        jr.field("loadings", jr.mapping, {}, item=jr.number),
        jr.field("reliability", _per_name, None),
    ), closed=True)
    states: tuple[State, ...] = fields["states"]
    if not states:
        raise FieldError(f"{where}.states", "needs at least one state")
    names = [s.name for s in states]
    spec = ModelSpec(states=states, lags=1)
    spec.validate()
    k, items = spec.k, spec.items
    b = np.diag([_one(fields["inertia"], s, INERTIA) for s in names])
    for n, (fr, to, effect) in enumerate(fields["cross_lagged"]):
        place = f"{where}.cross_lagged[{n}]"
        if fr == to:
            raise FieldError(place, "joins a state to itself (that is its inertia)")
        b[_index(names, to, place), _index(names, fr, place)] = effect
    if spectral_radius([b]) >= 1.0:
        raise FieldError(where, "the inertias and cross-lagged effects are not stationary "
                                "(the states would grow without bound)")
    psi = _innovation(fields["innovation_correlation"], names, f"{where}.innovation_correlation")
    phi = np.diag(stationary_covariance([b], psi))
    lam = np.zeros((len(items), k))
    for j, s in enumerate(states):
        for it in s.items:
            lam[items.index(it), j] = 1.0 if it == s.marker_item else \
                fields["loadings"].get(it, 1.0)
    for it in fields["loadings"]:
        if it not in items:
            raise FieldError(f"{where}.loadings", f"names '{it}', which no state has")
    unique, fixed = np.zeros(len(items)), []
    reliability = fields["reliability"]
    for j, s in enumerate(states):
        for it in s.items:
            default = RELIABILITY if len(s.items) > 1 else None
            r = default if reliability is None else _one(reliability, it, default)
            if r is None:
                continue
            if not 0.0 < r <= 1.0:
                raise FieldError(f"{where}.reliability", f"{r:g} for '{it}' is not in (0, 1]")
            i = items.index(it)
            unique[i] = lam[i, j] ** 2 * phi[j] * (1.0 - r) / r
            if len(s.items) == 1:
                fixed.append((it, r))
    spec = ModelSpec(states=states, lags=1, reliability=tuple(fixed))
    return Truth(spec, lam, np.zeros(len(items)), unique, (b,), psi, np.zeros(len(items)))


def _state(value: object, where: str) -> State:
    return State.from_json(value, where)


def _effect(value: object, where: str) -> tuple[str, str, float]:
    f = jr.read_fields(value, where, (jr.field("from", jr.name), jr.field("to", jr.name),
                                      jr.field("effect", jr.number)), closed=True)
    return f["from"], f["to"], f["effect"]


def _per_name(value: object, where: str) -> float | dict[str, float] | None:
    """One number for all, or a number per name."""
    if value is None or isinstance(value, (int, float)) and not isinstance(value, bool):
        return jr.number(value, where, null=True)
    return jr.mapping(value, where, item=jr.number)


def _one(values: float | dict[str, float], name: str, default: float | None) -> float | None:
    if isinstance(values, dict):
        return values.get(name, default)
    return values


def _correlations(value: object, where: str) -> float | tuple[tuple[str, str, float], ...]:
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return jr.number(value, where)

    def pair(entry: object, place: str) -> tuple[str, str, float]:
        f = jr.read_fields(entry, place, (
            jr.field("between", jr.tuple_of, item=jr.name, limit=2), jr.field("r", jr.number)),
            closed=True)
        if len(f["between"]) != 2:
            raise FieldError(f"{place}.between", "needs two states")
        return f["between"][0], f["between"][1], f["r"]
    return jr.tuple_of(value, where, item=pair)


def _innovation(value, names: list[str], where: str) -> np.ndarray:
    k = len(names)
    if isinstance(value, float):
        r = np.full((k, k), value)
    else:
        r = np.zeros((k, k))
        for a, b, v in value:
            i, j = _index(names, a, where), _index(names, b, where)
            r[i, j] = r[j, i] = v
    np.fill_diagonal(r, 1.0)
    if np.linalg.eigvalsh(r).min() <= 0.0:
        raise FieldError(where, "the innovation correlations are not a valid correlation "
                                "matrix (each must be between -1 and 1, and together consistent)")
    return r


def _index(names: list[str], name: str, where: str) -> int:
    if name not in names:
        raise FieldError(where, f"names the state '{name}', which the model does not have")
    return names.index(name)
