"""Model specification: states and their items, lag order, free paths, innovation form.

The model (published dynamic factor model, usual symbols):
    y_t   = nu + Lambda eta_t + eps_t,                eps_t ~ N(0, Theta), Theta diagonal
    eta_t = B_1 eta_{t-1} + ... + B_q eta_{t-q} + zeta_t,  zeta_t ~ N(0, Psi)
Path masks: ``paths[l][i][j]`` is True when state i at t depends on state j at t-(l+1);
the diagonal of lag 1 holds the inertias. An optional lag-1 autocorrelation d of an item's
unique part (eps_t = d eps_{t-1} + u_t) is listed in `unique_autocorrelation`.
Specifications are immutable values: editors build new ones (which makes undo simple).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Literal

import numpy as np

from lagwise.models import blocks
from lagwise.models import jsonread as jr
from lagwise.models import names as name_rules
from lagwise.models.blocks import Entry
from lagwise.models.errors import FieldError, SpecError
from lagwise.models.estimators import estimator
from lagwise.models.kinds import Kind

InnovationForm = Literal["free", "independent", "partial"]
Identification = Literal["marker", "variance"]
INNOVATION_FORMS: tuple[str, ...] = ("free", "independent", "partial")
IDENTIFICATIONS: tuple[str, ...] = ("marker", "variance")

PathMask = tuple[tuple[bool, ...], ...]


@dataclass(frozen=True)
class State:
    """A latent state measured by `items`; `marker` (default: the first item) has loading 1."""

    name: str
    items: tuple[str, ...]
    marker: str | None = None

    @property
    def marker_item(self) -> str:
        return self.marker if self.marker is not None else (self.items[0] if self.items else "")

    def to_json(self) -> dict:
        return {"name": self.name, "items": list(self.items), "marker": self.marker}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "State":
        """A state from `to_json` output; FieldError names a malformed field."""
        return cls(**jr.read_fields(doc, where, (
            jr.field("name", jr.name),
            jr.field("items", jr.tuple_of, item=jr.name, limit=jr.MAX_ITEMS),
            jr.field("marker", jr.name, None, null=True),
        )))


def full_mask(k: int, value: bool = True) -> PathMask:
    return tuple(tuple(value for _ in range(k)) for _ in range(k))


def inertia_mask(k: int) -> PathMask:
    return tuple(tuple(i == j for j in range(k)) for i in range(k))


@dataclass(frozen=True)
class ModelSpec:
    """A complete, immutable model specification (see module docstring).

    lags: 0 (a plain factor model: occasions treated as independent), 1 or 2.
    paths: one k x k mask per lag; None means every path free.
    innovations: "free" covariances, "independent" (diagonal Psi) or "partial"
        (Psi^-1 parameterised by partial correlations; pairs in `partial_zeros` fixed at 0).
    identification: "marker" (marker loading 1) or "variance" (innovation variance 1).
    reliability: item -> reliability for single-item states (unique variance then
        (1 - reliability) x the item's variance instead of 0).
    """

    states: tuple[State, ...]
    lags: int = 1
    paths: tuple[PathMask, ...] | None = None
    identification: Identification = "marker"
    innovations: InnovationForm = "free"
    partial_zeros: tuple[tuple[str, str], ...] = ()
    reliability: tuple[tuple[str, float], ...] = ()
    unique_autocorrelation: tuple[str, ...] = ()

    # ----- derived views -------------------------------------------------------------
    @property
    def state_names(self) -> tuple[str, ...]:
        return tuple(s.name for s in self.states)

    @property
    def k(self) -> int:
        return len(self.states)

    @property
    def items(self) -> tuple[str, ...]:
        """All items in order of first appearance."""
        seen: dict[str, None] = {}
        for s in self.states:
            for it in s.items:
                seen.setdefault(it, None)
        return tuple(seen)

    def path_mask(self, lag: int) -> np.ndarray:
        """(k, k) bool mask of free paths at `lag` (1-based); all True when unset."""
        if lag < 1 or lag > self.lags:
            raise ValueError(f"lag {lag} outside 1..{self.lags}")
        if self.paths is None or len(self.paths) < lag:
            return np.ones((self.k, self.k), dtype=bool)
        return np.array(self.paths[lag - 1], dtype=bool).reshape(self.k, self.k)

    def loading_mask(self) -> np.ndarray:
        """(p, k) bool: item i measures state j."""
        items = self.items
        mask = np.zeros((len(items), self.k), dtype=bool)
        for j, s in enumerate(self.states):
            for it in s.items:
                mask[items.index(it), j] = True
        return mask

    def reliability_of(self, item: str) -> float | None:
        return dict(self.reliability).get(item)

    # ----- editing helpers (each returns a new spec) ---------------------------------
    def with_paths(self, lag: int, mask: np.ndarray) -> "ModelSpec":
        masks = [self.path_mask(l).copy() for l in range(1, self.lags + 1)]
        masks[lag - 1] = np.asarray(mask, dtype=bool)
        return replace(self, paths=tuple(_as_mask(m) for m in masks))

    def with_lags(self, lags: int) -> "ModelSpec":
        masks = [self.path_mask(l) if l <= self.lags else np.zeros((self.k, self.k), bool)
                 for l in range(1, lags + 1)]
        return replace(self, lags=lags, paths=tuple(_as_mask(m) for m in masks))

    def with_states(self, states: tuple[State, ...]) -> "ModelSpec":
        """New states; path masks follow the states by name (new states: all paths free)."""
        old = self.state_names
        new = tuple(s.name for s in states)
        masks = []
        for lag in range(1, self.lags + 1):
            m_old = self.path_mask(lag)
            m = np.ones((len(new), len(new)), dtype=bool)
            for i, a in enumerate(new):
                for j, b in enumerate(new):
                    if a in old and b in old:
                        m[i, j] = m_old[old.index(a), old.index(b)]
            masks.append(_as_mask(m))
        zeros = tuple(z for z in self.partial_zeros if z[0] in new and z[1] in new)
        return replace(self, states=tuple(states), paths=tuple(masks), partial_zeros=zeros)

    # ----- the parameters --------------------------------------------------------------
    def parameters(self, free_first_copies: bool = False, continuous: bool = False
                   ) -> tuple[Entry, ...]:
        """Every parameter of the model, free or fixed, in the order of the free vector:
        loadings, intercepts, unique variances, unique autocorrelations, lagged paths,
        innovations (covariances, or variances and partial correlations), and for the
        first-copy-free estimator the oldest copies' covariance and the latent intercepts.
        continuous: the continuous-time model, whose drift takes the lag-1 paths' places (a
        fixed path is a drift of 0) and whose diffusion covariances take the innovations'."""
        if continuous:
            return self._measurement() + self._continuous_dynamics()
        items, states = self.items, self.state_names
        k, q = self.k, self.lags
        out: list[Entry] = list(self._measurement())
        for it in self.unique_autocorrelation:
            out.append(Entry(Kind.UNIQUE_AUTOCORRELATION, it, it, 1, blocks.UNIQUE_AR,
                             (items.index(it),), True))
        for lag in range(1, q + 1):
            mask = self.path_mask(lag)
            for i, to in enumerate(states):
                for j, fr in enumerate(states):
                    kind = Kind.LAG2 if lag == 2 else (Kind.INERTIA if i == j else Kind.CROSS_LAGGED)
                    out.append(Entry(kind, fr, to, lag, blocks.PATHS, (lag - 1, i, j), bool(mask[i, j])))
        var_id = self.identification == "variance"
        if self.innovations == "partial":
            zeros = {frozenset(z) for z in self.partial_zeros}
            for i, s in enumerate(states):
                out.append(Entry(Kind.INNOVATION, s, s, 0, blocks.PARTIAL_VARIANCE, (i,), not var_id, 1.0))
            for i in range(k):
                for j in range(i):
                    free = frozenset((states[i], states[j])) not in zeros
                    out.append(Entry(Kind.PARTIAL_CORRELATION, states[j], states[i], 0,
                                     blocks.PARTIAL_CORRELATION, (i, j), free))
        else:
            for i in range(k):
                for j in range(i + 1):
                    free = not var_id if i == j else self.innovations == "free"
                    out.append(Entry(Kind.INNOVATION, states[j], states[i], 0, blocks.PSI, (i, j),
                                     free, 1.0 if i == j else 0.0))
        if free_first_copies and q > 0:
            names = [f"{s}@t-{lag}" for lag in range(q) for s in states]
            for a in range(q * k):
                for b in range(a + 1):
                    out.append(Entry(Kind.FIRST_COPY, names[b], names[a], 0, blocks.FIRST_COPY,
                                     (a, b), True))
            for i, s in enumerate(states):
                out.append(Entry(Kind.LATENT_INTERCEPT, s, s, 0, blocks.LATENT_INTERCEPT, (i,), True))
        return tuple(out)

    def _measurement(self) -> tuple[Entry, ...]:
        """Loadings, intercepts and unique variances."""
        items = self.items
        out: list[Entry] = []
        marker_id = self.identification == "marker"
        for j, s in enumerate(self.states):
            for it in s.items:
                fixed = marker_id and it == s.marker_item
                out.append(Entry(Kind.LOADING, s.name, it, 0, blocks.LAMBDA, (items.index(it), j),
                                 not fixed, 1.0))
        for i, it in enumerate(items):
            out.append(Entry(Kind.INTERCEPT, it, it, 0, blocks.NU, (i,), True))
        single = {s.items[0] for s in self.states if len(s.items) == 1}
        for i, it in enumerate(items):
            rel = self.reliability_of(it)
            if it in single:  # measured without error, or with the given reliability
                out.append(Entry(Kind.UNIQUE, it, it, 0, blocks.THETA, (i,), False,
                                 0.0 if rel is None else 1.0 - rel, per_item_variance=rel is not None))
            else:
                out.append(Entry(Kind.UNIQUE, it, it, 0, blocks.THETA, (i,), True))
        return tuple(out)

    def _continuous_dynamics(self) -> tuple[Entry, ...]:
        """Drift (free where the lag-1 path is) and diffusion (variances and covariances, free
        as the innovations would be; the partial form has free covariances)."""
        states, mask = self.state_names, self.path_mask(1)
        var_id = self.identification == "variance"
        out = [Entry(Kind.DRIFT, fr, to, 0, blocks.DRIFT, (i, j), bool(mask[i, j]))
               for i, to in enumerate(states) for j, fr in enumerate(states)]
        for i in range(self.k):
            for j in range(i + 1):
                free = not var_id if i == j else self.innovations != "independent"
                out.append(Entry(Kind.DIFFUSION, states[j], states[i], 0, blocks.DIFFUSION,
                                 (i, j), free, 1.0 if i == j else 0.0))
        return tuple(out)

    def n_free(self, estimator_name: str = "stationary") -> int:
        """Number of free parameters when estimated with `estimator_name`."""
        method = estimator(estimator_name)
        return sum(e.free for e in self.parameters(method.free_first_copies, method.continuous))

    # ----- validation ----------------------------------------------------------------
    def validate(self, available_items: tuple[str, ...] | list[str] | None = None) -> list[str]:
        """Raise SpecError for a model that cannot be estimated; return plain-word notes."""
        notes: list[str] = []
        if not self.states:
            raise SpecError("The model has no states: add a state and give it items.")
        _check_names(self)
        names = self.state_names
        if len(set(names)) != len(names):
            raise SpecError("Two states share a name: give each state its own name.")
        if any(not n.strip() for n in names):
            raise SpecError("A state has an empty name.")
        if self.lags not in (0, 1, 2):
            raise SpecError(f"Lag order must be 0, 1 or 2, not {self.lags}.")
        if self.identification not in IDENTIFICATIONS:
            raise SpecError(f"Unknown identification '{self.identification}'.")
        if self.innovations not in INNOVATION_FORMS:
            raise SpecError(f"Unknown innovation form '{self.innovations}'.")
        for s in self.states:
            if not s.items:
                raise SpecError(f"State '{s.name}' has no items: assign at least one item.")
            if len(set(s.items)) != len(s.items):
                raise SpecError(f"State '{s.name}' lists an item twice.")
            if self.identification == "marker" and s.marker_item not in s.items:
                raise SpecError(f"State '{s.name}': marker '{s.marker_item}' is not one of its items.")
            if available_items is not None:
                for it in s.items:
                    if it not in available_items:
                        raise SpecError(f"State '{s.name}': unknown item '{it}' (not in the data).")
        if self.paths is not None:
            if len(self.paths) != self.lags:
                raise SpecError(f"Expected {self.lags} path mask(s), got {len(self.paths)}.")
            for m in self.paths:
                if np.array(m).shape != (self.k, self.k):
                    raise SpecError("A path mask does not match the number of states.")
        for a, b in self.partial_zeros:
            if a not in names or b not in names or a == b:
                raise SpecError(f"Partial-correlation zero ({a}, {b}) does not name two states.")
        items = self.items
        for it, r in self.reliability:
            if it not in items:
                raise SpecError(f"Reliability given for '{it}', which no state uses.")
            if not 0.0 < r <= 1.0:
                raise SpecError(f"Reliability of '{it}' must lie in (0, 1], not {r}.")
        for it in self.unique_autocorrelation:
            if it not in items:
                raise SpecError(f"Unique autocorrelation for '{it}', which no state uses.")
        for s in self.states:
            if len(s.items) == 1:
                it = s.items[0]
                if self.reliability_of(it) is None and _n_states_of(self, it) == 1:
                    notes.append(f"{s.name} has one item: its unique variance is fixed at 0 "
                                 f"(it is measured without error).")
                elif _n_states_of(self, it) == 1:
                    notes.append(f"{s.name} has one item: its unique variance is fixed by the "
                                 f"reliability {self.reliability_of(it):g}.")
            elif len(s.items) == 2 and self.k == 1 and self.lags == 0:
                raise SpecError(f"State '{s.name}' has two items and nothing else to lean on: "
                                f"it is not identified. Add a third item.")
        return notes

    # ----- JSON ----------------------------------------------------------------------
    def to_json(self) -> dict:
        return {
            "states": [s.to_json() for s in self.states],
            "lags": self.lags,
            "paths": None if self.paths is None else [[list(r) for r in m] for m in self.paths],
            "identification": self.identification,
            "innovations": self.innovations,
            "partial_zeros": [list(z) for z in self.partial_zeros],
            "reliability": {k: v for k, v in self.reliability},
            "unique_autocorrelation": list(self.unique_autocorrelation),
        }

    @classmethod
    def from_json(cls, doc: object, where: str = "", validate: bool = True) -> "ModelSpec":
        """Build a spec from `to_json` output.

        A malformed document raises FieldError naming the field (`where`: the document's own
        path, e.g. "results.spec"). With `validate` (the default) a spec that cannot be
        estimated raises SpecError (`validate`); without it an unfinished model is returned.
        """
        fields = jr.read_fields(doc, where, (
            jr.field("states", jr.tuple_of, item=State.from_json, limit=jr.MAX_STATES),
            jr.field("lags", jr.integer, 1, low=0, high=2),
            jr.field("paths", jr.array, None, limit=2, null=True),  # masks read below
            jr.field("identification", jr.choice, "marker", choices=IDENTIFICATIONS),
            jr.field("innovations", jr.choice, "free", choices=INNOVATION_FORMS),
            jr.field("partial_zeros", jr.tuple_of, [], item=_state_pair),
            jr.field("reliability", _reliability, {}),
            jr.field("unique_autocorrelation", jr.tuple_of, [], item=jr.name,
                     limit=jr.MAX_ITEMS),
        ))
        if fields["paths"] is not None:  # their shape follows the lag order and the states
            fields["paths"] = _masks(fields["paths"], jr.at(where, "paths"), fields["lags"],
                                     len(fields["states"]))
        spec = cls(**fields)
        if validate:
            spec.validate()
        return spec


def _masks(masks: list, where: str, lags: int, k: int) -> tuple[PathMask, ...]:
    """One k x k true/false mask per lag."""
    if len(masks) != lags:
        raise FieldError(where, f"should hold {lags} path mask(s)")
    out = []
    for lag, mask in enumerate(masks):
        rows = jr.array(mask, f"{where}[{lag}]", k)
        if len(rows) != k:
            raise FieldError(f"{where}[{lag}]", f"should be {k} x {k} (one row per state)")
        for i, row in enumerate(rows):
            if len(jr.array(row, f"{where}[{lag}][{i}]", k)) != k:
                raise FieldError(f"{where}[{lag}][{i}]", f"should hold {k} true/false values")
        out.append(tuple(jr.tuple_of(row, f"{where}[{lag}][{i}]", jr.boolean)
                         for i, row in enumerate(rows)))
    return tuple(out)


def _state_pair(value: object, where: str) -> tuple[str, str]:
    pair = jr.tuple_of(value, where, jr.name, 2)
    if len(pair) != 2:
        raise FieldError(where, "should name two states")
    return pair


def _reliability(value: object, where: str) -> tuple[tuple[str, float], ...]:
    return tuple(jr.mapping(value, where, jr.number).items())


def _check_names(spec: ModelSpec) -> None:
    """SpecError for a state or item name with a control character (models.names); the
    other checks may then quote the names as they are."""
    named = [("State name", s.name) for s in spec.states]
    named += [(f"An item of state '{s.name}'", it) for s in spec.states for it in s.items]
    named += [(f"The marker of state '{s.name}'", s.marker) for s in spec.states
              if s.marker is not None]
    named += [("A reliability's item", it) for it, _ in spec.reliability]
    named += [("A unique autocorrelation's item", it) for it in spec.unique_autocorrelation]
    named += [("A partial-correlation zero", name) for pair in spec.partial_zeros for name in pair]
    for what, name in named:
        refused = name_rules.problem(name)
        if refused:
            raise SpecError(f"{what} {refused}.")


def _as_mask(m: np.ndarray) -> PathMask:
    return tuple(tuple(bool(v) for v in row) for row in np.asarray(m, dtype=bool))


def _n_states_of(spec: ModelSpec, item: str) -> int:
    return sum(item in s.items for s in spec.states)


def make_spec(states: dict[str, list[str]] | list[tuple[str, list[str]]], lags: int = 1,
              **options) -> ModelSpec:
    """Convenience: ``make_spec({"mood": ["happy", "sad"], ...}, lags=1)``."""
    pairs = list(states.items()) if isinstance(states, dict) else list(states)
    return ModelSpec(states=tuple(State(n, tuple(i)) for n, i in pairs), lags=lags, **options)
