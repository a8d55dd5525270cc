"""Impulse responses: what follows a rise in one state over the next prompts.

For the states' dynamics eta_t = B_1 eta_{t-1} + ... + B_q eta_{t-q} + zeta_t,
zeta_t ~ N(0, Psi) (Lutkepohl 2005, New Introduction to Multiple Time Series Analysis,
section 2.3.2):

- unit responses Phi_h (k x k): Phi_0 = I, Phi_h = sum_{l=1..min(h,q)} B_l Phi_{h-l}, the
  same as J F^h J' with the companion matrix F (models.lyapunov.companion) and
  J = [I 0 ... 0]. Phi_h[i, j] is the response of state i, h prompts after an innovation of
  1 in state j with the other innovations 0 (in the states' own units).
- orthogonal responses Theta_h = Phi_h P, P the lower Cholesky factor of Psi with the states
  taken in `order` (P P' = Psi; rows and columns reported in the spec's state order).
  Theta_h[i, j] is the response of state i to a rise of one standard deviation in the part of
  j's innovation that the states before j in the order do not share. Whenever innovations
  correlate, the order changes these responses; unit responses do not depend on it.
- cumulative responses: sum_{s=0..h} of either.
- standardized responses divide by the stationary SD of the responding state,
  sd = sqrt(diag Phi(0)), Phi(0) the stationary covariance of the states (Lyapunov equation
  of the companion form). Unit: Phi_h[i, j] sd_j / sd_i, a rise of one SD of state j and the
  response in SDs of state i (at h = 1 in a lag-1 model: the standardized lagged path).
  Orthogonal: Theta_h[i, j] / sd_i, the shock being one SD of j's orthogonalised innovation.
  Not available when the paths are not stationary (no stationary SD).
- half-life of state i: the smallest h >= 1 with |Phi_h[i, i]| < 1/2, i.e. below half of its
  impact Phi_0[i, i] = 1 (for an AR(1) with inertia r in (0, 1): the smallest h with
  r^h < 1/2; common practice); None when not within the horizon.
- bands, pointwise at `level`: the delta method (Lutkepohl 2005, section 3.7.1),
  estimate ± z SE with SE^2 the diagonal of G Cov(theta) G', Cov(theta) = result.covariance
  and G the Jacobian of the responses with respect to the free parameters by central
  differences through ParameterLayout.unpack (so every lag order and innovation form is
  covered, and standardized responses carry the uncertainty of the SDs); or, with bootstrap
  replicates of the free parameters, percentile bands (Efron & Tibshirani 1993, An
  Introduction to the Bootstrap, chapter 13; numpy's linear interpolation of quantiles).

Arrays are (H+1, k, k): [h, i, j] = response of state i, h prompts after a shock to state j.
"""

from __future__ import annotations

import warnings
import weakref
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from functools import partial
from typing import Protocol

import numpy as np
from scipy.stats import norm

from lagwise.models import jsonread as jr
from lagwise.models.errors import FieldError, SpecError
from lagwise.models.numbers import fmt
from lagwise.models.parameters import ParameterLayout
from lagwise.models.results import FitResult, _finite

MAX_HORIZON = 200
DEFAULT_HORIZON = 10
FORMS = ("unit", "orthogonal")
INTERVALS = ("delta", "percentile", "none")
_DYNAMICS_MATRICES = frozenset(("lagged", "psi", "pv", "rmat"))  # what the responses depend on


def variant(form: str = "unit", cumulative: bool = False, standardized: bool = False) -> str:
    """The name of one kind of response, e.g. "orthogonal_cumulative_standardized"."""
    if form not in FORMS:
        raise ValueError(f"form should be one of {FORMS}, not {form!r}")
    return form + ("_cumulative" if cumulative else "") + ("_standardized" if standardized else "")


VARIANTS = tuple(variant(f, c, s) for f in FORMS for c in (False, True) for s in (False, True))


class Replicates(Protocol):
    """Bootstrap replicates: `estimates` (replicates, n_free), in the order of
    `FitResult.free_parameters`."""

    estimates: np.ndarray


@dataclass(frozen=True)
class ResponseChoice:
    """What the Responses tab shows (kept with the project): the horizon, the order of the
    states for orthogonal responses (empty: the states' own order), the form, cumulative or
    not, and standardized or in the states' own units."""

    horizon: int = DEFAULT_HORIZON
    order: tuple[str, ...] = ()
    form: str = "unit"
    cumulative: bool = False
    standardized: bool = True

    def to_json(self) -> dict:
        return {"horizon": self.horizon, "order": list(self.order), "form": self.form,
                "cumulative": self.cumulative, "standardized": self.standardized}

    @classmethod
    def from_json(cls, doc: object, where: str = "", states: Sequence[str] | None = None
                  ) -> "ResponseChoice":
        """The choice from `to_json` output (strict); with `states`, the order must hold
        exactly those states (or be empty)."""
        fields = jr.read_fields(doc, where, (
            jr.field("horizon", jr.integer, low=1, high=MAX_HORIZON),
            jr.field("order", jr.tuple_of, item=jr.text, limit=jr.MAX_STATES),
            jr.field("form", jr.choice, choices=FORMS),
            jr.field("cumulative", jr.boolean),
            jr.field("standardized", jr.boolean)), closed=True)
        order = fields["order"]
        if states is not None and order and sorted(order) != sorted(states):
            raise FieldError(jr.at(where, "order"),
                             f"should hold the states {list(states)}, not {list(order)}")
        return cls(**fields)


@dataclass(frozen=True, eq=False)
class Curve:
    """One kind of response (arrays (H+1, k, k)): the estimate, its delta-method standard
    error and the band's ends (None when not available; NaN cells where not computable)."""

    estimate: np.ndarray
    se: np.ndarray | None = None
    lower: np.ndarray | None = None
    upper: np.ndarray | None = None


@dataclass(frozen=True, eq=False)
class Responses:
    """The impulse responses of one fit (see the module docstring).

    curves: one Curve per name in VARIANTS; half_life and oscillates: per state (own unit
    response); state_sd: stationary SDs (NaN when not stationary); innovation_sd:
    sqrt(diag Psi); interval: how the bands were made ("delta", "percentile", "none").
    """

    states: tuple[str, ...]
    horizon: int
    order: tuple[str, ...]
    curves: Mapping[str, Curve]
    half_life: tuple[int | None, ...]
    oscillates: tuple[bool, ...]
    state_sd: np.ndarray
    innovation_sd: np.ndarray
    level: float = 0.95
    interval: str = "delta"
    replicates: int = 0
    notes: tuple[str, ...] = ()

    def curve(self, form: str = "unit", cumulative: bool = False, standardized: bool = False) -> Curve:
        return self.curves[variant(form, cumulative, standardized)]

    @property
    def unit(self) -> np.ndarray:
        return self.curves["unit"].estimate

    @property
    def orthogonal(self) -> np.ndarray:
        return self.curves["orthogonal"].estimate

    @property
    def standardized_available(self) -> bool:
        return bool(np.all(np.isfinite(self.state_sd)))

    @property
    def orthogonal_available(self) -> bool:
        return bool(np.all(np.isfinite(self.orthogonal)))

    # ----- words ---------------------------------------------------------------------------
    def sentence(self, shock: int | str, standardized: bool = False) -> str:
        """One plain sentence about a rise in state `shock` (unit responses, one prompt later,
        and the state's own half-life)."""
        j = shock if isinstance(shock, int) else self.states.index(shock)
        standardized = standardized and self.standardized_available
        name = self.states[j]
        curve = self.curve("unit", standardized=standardized)
        sd = " SD" if standardized else ""
        others = [i for i in range(len(self.states)) if i != j] or [j]
        moves, still, moved = [], [], []
        for i in others:
            target = f"{name} itself" if i == j else self.states[i]
            size = fmt(abs(curve.estimate[1, i, j]))
            if size == "0.000":
                still.append(target)
            else:
                way = "rise" if curve.estimate[1, i, j] > 0 else "fall"
                moved.append(i)
                moves.append(f"a {way} of {size}{sd} in {target}")
        if still:
            moves.append("no change in " + _join(still, "or"))
        text = f"A rise of 1{sd} in {name} is followed by {_join(moves)} one prompt later"
        own = "it" if others == [j] else f"{name} itself"
        half = self.half_life[j]
        if half is None:
            text += f"; {own} has not halved within {_prompts(self.horizon)}"
        else:
            text += f"; by {_prompts(half)} {own} has halved"
        if self.oscillates[j]:
            text += " (its own response swings between rises and falls)"
        if curve.lower is not None and curve.upper is not None and others != [j]:
            zero = [self.states[i] for i in moved if i != j
                    and curve.lower[1, i, j] <= 0.0 <= curve.upper[1, i, j]]
            if zero:
                text += (f"; the {_percent(self.level)} band one prompt later includes 0 for "
                         f"{_join(zero)}")
        return text + "."

    def sentences(self, standardized: bool = False) -> tuple[str, ...]:
        """One sentence per state, in the spec's state order."""
        return tuple(self.sentence(j, standardized) for j in range(len(self.states)))

    # ----- JSON -----------------------------------------------------------------------------
    def to_json(self) -> dict:
        """unit[h][i][j]: the response of state i, h prompts after a shock to state j (the
        states' own units); likewise every other variant, its _se, _lower and _upper."""
        doc = {"format": "lagwise-responses", "states": list(self.states), "horizon": self.horizon,
               "order": list(self.order), "level": self.level, "interval": self.interval,
               "replicates": self.replicates}
        for name in VARIANTS:
            c = self.curves[name]
            doc[name] = c.estimate.tolist()
            for part in ("se", "lower", "upper"):
                value = getattr(c, part)
                doc[f"{name}_{part}"] = None if value is None else value.tolist()
        doc.update(half_life=list(self.half_life), oscillates=list(self.oscillates),
                   state_sd=self.state_sd.tolist(), innovation_sd=self.innovation_sd.tolist(),
                   notes=list(self.notes), sentences=list(self.sentences()))
        return _finite(doc)

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "Responses":
        """Responses from `to_json` output (strict: no unknown fields, shapes follow the states
        and the horizon); FieldError names a malformed field."""
        arrays = tuple(f"{name}{part}" for name in VARIANTS for part in ("", "_se", "_lower", "_upper"))
        fields = jr.read_fields(doc, where, (
            jr.field("format", jr.choice, choices=("lagwise-responses",)),
            jr.field("states", jr.tuple_of, item=jr.text, limit=jr.MAX_STATES),
            jr.field("horizon", jr.integer, low=1, high=MAX_HORIZON),
            jr.field("order", jr.tuple_of, item=jr.text, limit=jr.MAX_STATES),
            jr.field("level", _level),
            jr.field("interval", jr.choice, choices=INTERVALS),
            jr.field("replicates", jr.integer, low=0),
            jr.field("half_life", jr.tuple_of, item=partial(jr.integer, low=1, null=True)),
            jr.field("oscillates", jr.tuple_of, item=jr.boolean),
            jr.field("state_sd", jr.array),
            jr.field("innovation_sd", jr.array),
            jr.field("notes", jr.tuple_of, item=partial(jr.text, limit=jr.MAX_TEXT)),
            jr.field("sentences", jr.tuple_of, item=partial(jr.text, limit=jr.MAX_TEXT)),
        ), closed=True, others=arrays)
        fields.pop("format")
        fields.pop("sentences")  # words made from the numbers: written for readers only
        states, horizon = fields["states"], fields["horizon"]
        k = len(states)
        if len(set(states)) != k or not k:
            raise FieldError(jr.at(where, "states"), "should name each state once")
        if sorted(fields["order"]) != sorted(states):
            raise FieldError(jr.at(where, "order"), "should list the states, each once")
        for key in ("half_life", "oscillates"):
            if len(fields[key]) != k:
                raise FieldError(jr.at(where, key), f"should hold one value per state ({k})")
        if any(h is not None and h > horizon for h in fields["half_life"]):
            raise FieldError(jr.at(where, "half_life"), f"should not exceed the horizon ({horizon})")
        for key in ("state_sd", "innovation_sd"):
            fields[key] = jr.matrix(fields[key], jr.at(where, key), (k,))
        shape = (horizon + 1, k, k)
        table = partial(jr.matrix, shape=shape)
        values = jr.read_fields(doc, where, tuple(
            jr.field(name, table) if name in VARIANTS else jr.field(name, _optional, shape=shape)
            for name in arrays))
        fields["curves"] = {name: Curve(values[name], values[f"{name}_se"], values[f"{name}_lower"],
                                        values[f"{name}_upper"]) for name in VARIANTS}
        return cls(**fields)


def _level(value: object, where: str) -> float:
    level = jr.number(value, where)
    if not 0.0 < level < 1.0:
        raise FieldError(where, f"should lie between 0 and 1, not {level}")
    return level


def _optional(value: object, where: str, shape: tuple[int, ...]) -> np.ndarray | None:
    return None if value is None else jr.matrix(value, where, shape)


def _join(words: Sequence[str], last: str = "and") -> str:
    words = list(words)
    return words[0] if len(words) == 1 else f"{', '.join(words[:-1])} {last} {words[-1]}"


def _prompts(n: int) -> str:
    return f"{n} prompt" + ("" if n == 1 else "s")


def _percent(level: float) -> str:
    return f"{100 * level:g}%"


# ============================================================================ computation

def impulse_responses(result: FitResult, horizon: int = DEFAULT_HORIZON, order: Sequence[str] | None = None,
                      bootstrap: Replicates | None = None, level: float = 0.95) -> Responses:
    """Unit, orthogonal, cumulative and standardized responses of `result` for h = 0..horizon,
    with pointwise bands at `level`: percentile bands of `bootstrap.estimates` when given,
    otherwise delta-method bands from `result.covariance` (none without it)."""
    states = tuple(result.states)
    k = len(states)
    horizon = check_horizon(horizon)
    if not 0.0 < level < 1.0:
        raise SpecError(f"The band level must lie between 0 and 1, not {level}.")
    order = states if order is None else tuple(order)
    if sorted(order) != sorted(states) or len(set(order)) != k:
        raise SpecError(f"The order should list the states {', '.join(states)}, each once.")
    perm = [states.index(s) for s in order]
    lagged, psi = _stack([(result.lagged, result.innovation)], len(result.lagged), k)
    point = _variants(lagged, psi, horizon, perm)[0]
    unit = point[0]
    notes = []
    se, lower, upper, interval, replicates = None, None, None, "none", 0
    link = _Link.of(result)
    if link is None and (result.covariance is not None or bootstrap is not None):
        notes.append("No bands: the result's free parameters do not match its model.")
    elif bootstrap is not None:
        draws = link.replicates(np.asarray(bootstrap.estimates, dtype=float), horizon, perm)
        replicates = draws.shape[0]
        lower, upper = _percentiles(draws, level)
        interval = "percentile"
        notes.append(f"{_percent(level).capitalize()} bands: percentiles of {replicates} bootstrap "
                     "replicates, prompt by prompt.")
    if link is not None and result.covariance is not None:
        jac = _delta_jacobian(result, link, horizon, perm)
        cov = np.asarray(result.covariance, dtype=float)[np.ix_(link.columns, link.columns)]
        se = np.sqrt(np.clip(np.sum((jac @ cov) * jac, axis=1), 0.0, None)).reshape(point.shape)
        if interval == "none":
            z = float(norm.ppf(0.5 + level / 2))
            lower, upper, interval = point - z * se, point + z * se, "delta"
            notes.append(f"{_percent(level).capitalize()} bands: estimate ± {z:.2f} standard errors "
                         "(delta method, from the covariance of the free parameters), prompt by "
                         "prompt; they are approximate.")
    elif interval == "none" and link is not None:
        notes.append("No bands: the result carries no covariance of its free parameters.")
    curves = {name: Curve(point[n], None if se is None else se[n],
                          None if lower is None else lower[n], None if upper is None else upper[n])
              for n, name in enumerate(VARIANTS)}
    half_life, oscillates = _half_lives(unit)
    sd = stationary_sd(lagged, psi)[0]
    notes += _notes(states, order, sd, half_life, oscillates, horizon, point)
    return Responses(states, horizon, order, curves, half_life, oscillates, sd,
                     np.sqrt(np.clip(np.diag(psi[0]), 0.0, None)), level, interval, replicates,
                     tuple(notes))


def check_horizon(horizon: int) -> int:
    """`horizon` as a whole number of prompts in 1..MAX_HORIZON (SpecError otherwise)."""
    if isinstance(horizon, bool) or not isinstance(horizon, (int, np.integer)):
        raise SpecError(f"The horizon should be a whole number of prompts, not {horizon!r}.")
    if not 1 <= horizon <= MAX_HORIZON:
        raise SpecError(f"The horizon should lie between 1 and {MAX_HORIZON} prompts, not {horizon}.")
    return int(horizon)


def unit_responses(lagged: np.ndarray, horizon: int) -> np.ndarray:
    """Phi_0 = I, Phi_h = sum_{l=1..min(h,q)} B_l Phi_{h-l} (Lutkepohl 2005, eq. 2.1.22), for a
    stack of models: lagged (n, q, k, k) -> (n, H+1, k, k)."""
    n, q, k = lagged.shape[0], lagged.shape[1], lagged.shape[-1]
    phi = np.zeros((n, horizon + 1, k, k))
    phi[:, 0] = np.eye(k)
    for h in range(1, horizon + 1):
        for lag in range(1, min(h, q) + 1):
            phi[:, h] += lagged[:, lag - 1] @ phi[:, h - lag]
    return phi


def ordered_cholesky(psi: np.ndarray, perm: Sequence[int]) -> np.ndarray:
    """P with P P' = Psi, lower triangular when the states are taken in the order `perm`
    (perm[a]: the spec index of the a-th state), for a stack (n, k, k) of Psi; NaN where a Psi
    is not positive definite."""
    perm = np.asarray(perm)
    out = np.full_like(psi, np.nan)
    ordered = psi[:, perm][:, :, perm]
    try:
        factors = np.linalg.cholesky(ordered)
    except np.linalg.LinAlgError:
        factors = np.full_like(ordered, np.nan)
        for n, one in enumerate(ordered):
            try:
                factors[n] = np.linalg.cholesky(one)
            except np.linalg.LinAlgError:
                pass
    out[:, perm[:, None], perm[None, :]] = factors
    return out


_CHUNK = 2_000_000     # numbers per stacked evaluation (bounds the memory of big models)
_DOUBLINGS = 64        # doubling steps at most (sums 2^64 terms: any stationary model converges)


def stationary_sd(lagged: np.ndarray, psi: np.ndarray) -> np.ndarray:
    """sqrt(diag Phi(0)) for stacks lagged (n, q, k, k), psi (n, k, k): Phi(0) is the top-left
    block of P = F P F' + blockdiag(Psi, 0) (as models.lyapunov, here for a whole stack by
    doubling); NaN where not stationary."""
    n, q, k = lagged.shape[0], lagged.shape[1], psi.shape[-1]
    variances = np.clip(np.diagonal(psi, axis1=1, axis2=2), 0.0, None)
    if q == 0:
        return np.sqrt(variances)
    size = q * k
    f = np.zeros((n, size, size))
    f[:, :k, :] = np.concatenate(list(np.moveaxis(lagged, 1, 0)), axis=-1)
    f[:, k:, :-k] = np.eye(size - k)
    out = np.full((n, k), np.nan)
    finite = np.all(np.isfinite(f), axis=(1, 2))
    ok = np.zeros(n, dtype=bool)
    ok[finite] = np.max(np.abs(np.linalg.eigvals(f[finite])), axis=-1) < 1.0
    if not ok.any():
        return out
    a = f[ok]
    p = np.zeros((len(a), size, size))
    p[:, :k, :k] = psi[ok]
    for _ in range(_DOUBLINGS):   # Smith's doubling: P += A P A', A = A A (common practice)
        p = p + a @ p @ np.swapaxes(a, 1, 2)
        a = a @ a
        if np.max(np.abs(a)) < 1e-12:
            break
    with np.errstate(invalid="ignore"):
        out[ok] = np.sqrt(np.diagonal(p, axis1=1, axis2=2)[:, :k])
    return out


def _variants(lagged: np.ndarray, psi: np.ndarray, horizon: int, perm: Sequence[int]) -> np.ndarray:
    """Every variant (in the order of VARIANTS) for a stack of models, lagged (n, q, k, k) and
    psi (n, k, k): (n, len(VARIANTS), H+1, k, k)."""
    unit = unit_responses(lagged, horizon)
    orthogonal = unit @ ordered_cholesky(psi, perm)[:, None]
    sd = stationary_sd(lagged, psi)[:, None]
    with np.errstate(invalid="ignore", divide="ignore"):
        scaled = {"unit": unit * sd[:, :, None, :] / sd[:, :, :, None],
                  "orthogonal": orthogonal / sd[:, :, :, None]}
    plain = {"unit": unit, "orthogonal": orthogonal}
    out = []
    for form in FORMS:
        for cumulative in (False, True):
            for values in (plain[form], scaled[form]):
                out.append(np.cumsum(values, axis=1) if cumulative else values)
    return np.stack(out, axis=1)


def _stack(models: Sequence[tuple[np.ndarray, np.ndarray]], q: int, k: int) -> tuple[np.ndarray, np.ndarray]:
    """(lagged (n, q, k, k), psi (n, k, k)) from (lagged, psi) pairs."""
    lagged = np.empty((len(models), q, k, k))
    psi = np.empty((len(models), k, k))
    for n, (b, p) in enumerate(models):
        lagged[n] = np.reshape(b, (q, k, k))
        psi[n] = p
    return lagged, psi


def _half_lives(unit: np.ndarray) -> tuple[tuple[int | None, ...], tuple[bool, ...]]:
    half, swings = [], []
    for i in range(unit.shape[1]):
        own = unit[:, i, i]
        below = np.flatnonzero(np.abs(own[1:]) < 0.5 * abs(own[0]))
        half.append(int(below[0]) + 1 if below.size else None)
        signs = np.sign(own[np.abs(own) > 1e-12])
        swings.append(bool(np.any(signs[1:] != signs[:-1])))
    return tuple(half), tuple(swings)


def _notes(states, order, sd, half_life, oscillates, horizon, point) -> list[str]:
    notes = []
    if len(states) > 1:
        notes.append(f"Orthogonal responses depend on the order of the states (here {', '.join(order)}): "
                     "each state's innovation may move the states after it in the order at the same "
                     "prompt, not those before it. Unit responses do not depend on the order.")
    if not np.all(np.isfinite(point[VARIANTS.index("orthogonal")])):
        notes.append("The innovation covariance is not positive definite: orthogonal responses "
                     "are not available.")
    if not np.all(np.isfinite(sd)):
        notes.append("The lagged paths are not stationary: the responses do not die out, and "
                     "standardized responses are not available (the states have no stationary SD).")
    swinging = [s for s, o in zip(states, oscillates) if o]
    if swinging:
        notes.append(f"The own response of {_join(swinging)} swings between rises and falls within "
                     f"{_prompts(horizon)}: the half-life then reads the size of the swings.")
    return notes


_JACOBIANS: "weakref.WeakKeyDictionary[FitResult, dict]" = weakref.WeakKeyDictionary()


def _delta_jacobian(result: FitResult, link: "_Link", horizon: int, perm: Sequence[int]) -> np.ndarray:
    """The delta method's Jacobian, computed once per result and order (kept while the result
    lives): a shorter horizon is a slice of a longer one, since every variant at h depends on
    the responses up to h only."""
    memo = _JACOBIANS.setdefault(result, {})
    longest, jac = memo.get(tuple(perm), (-1, None))
    if longest < horizon:
        jac = link.jacobian(horizon, perm)
        memo[tuple(perm)] = (horizon, jac)
        return jac
    columns = jac.shape[1]
    return jac.reshape(len(VARIANTS), longest + 1, -1, columns)[:, :horizon + 1].reshape(-1, columns)


def _percentiles(draws: np.ndarray, level: float) -> tuple[np.ndarray, np.ndarray]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # a cell no replicate could compute
        low, high = np.nanpercentile(draws, [50 * (1 - level), 50 * (1 + level)], axis=0)
    return low, high


class _Link:
    """The result's free parameters as the model's matrices: which parameters move the
    dynamics (`columns`, positions in `result.free_parameters`), and the responses as a
    function of them."""

    def __init__(self, layout: ParameterLayout, theta: np.ndarray, order: np.ndarray):
        self.layout, self.theta, self.order = layout, theta, order   # order: layout -> result
        relevant = [n for n, e in enumerate(layout.free_entries)
                    if e.block.matrix in _DYNAMICS_MATRICES]
        self.relevant = np.array(relevant, dtype=np.int64)
        self.columns = order[self.relevant]
        self.variance = np.array([layout.free_entries[n].is_variance for n in relevant], dtype=bool)

    @classmethod
    def of(cls, result: FitResult) -> "_Link | None":
        """None when the result's free parameters are not those of its model's layout."""
        layout = ParameterLayout(result.spec, free_first_copies=result.options.method.free_first_copies)
        free = result.free_parameters
        keys = [p.key for p in free]
        position = {key: n for n, key in enumerate(keys)}
        if len(position) != len(keys) or set(position) != {e.key for e in layout.free_entries}:
            return None
        order = np.array([position[e.key] for e in layout.free_entries], dtype=np.int64)
        theta = np.array([free[n].estimate for n in order], dtype=float)
        return cls(layout, theta, order)

    def _evaluate(self, thetas: np.ndarray, horizon: int, perm: Sequence[int]) -> np.ndarray:
        """All variants, flattened, for each row of `thetas` (layout order): (n, size), computed
        in chunks of stacked models."""
        q, k = self.layout.q, self.layout.k
        size = len(VARIANTS) * (horizon + 1) * k * k
        out = np.empty((len(thetas), size))
        chunk = max(1, _CHUNK // size)
        for start in range(0, len(thetas), chunk):
            models = []
            for theta in thetas[start:start + chunk]:
                m = self.layout.unpack(theta)
                models.append((m.lagged.copy(), m.psi.copy()))
            values = _variants(*_stack(models, q, k), horizon, perm)
            out[start:start + len(models)] = values.reshape(len(models), size)
        return out

    def jacobian(self, horizon: int, perm: Sequence[int]) -> np.ndarray:
        """d (all variants, flattened) / d the dynamics' free parameters (`columns` order), by
        central differences; variances are stepped no further than half their value."""
        own = self.theta[self.relevant]
        step = 1e-5 * np.maximum(np.abs(own), 1e-2)
        step = np.where(self.variance & (own > 0), np.minimum(step, 0.5 * own), step)
        thetas = np.repeat(self.theta[None], 2 * len(step), axis=0)
        rows = np.arange(len(step))
        thetas[2 * rows, self.relevant] += step
        thetas[2 * rows + 1, self.relevant] -= step
        values = self._evaluate(thetas, horizon, perm)
        return ((values[0::2] - values[1::2]) / (2 * step[:, None])).T

    def replicates(self, estimates: np.ndarray, horizon: int, perm: Sequence[int]) -> np.ndarray:
        """All variants for each replicate (rows in the order of `result.free_parameters`):
        (replicates, len(VARIANTS), H+1, k, k); replicates with a missing estimate are left out."""
        if estimates.ndim != 2 or estimates.shape[1] != len(self.order):
            raise SpecError(f"Bootstrap estimates should be a table of replicates x "
                            f"{len(self.order)} free parameters, not {estimates.shape}.")
        rows = estimates[np.all(np.isfinite(estimates[:, self.columns]), axis=1)]
        if not len(rows):
            raise SpecError("No bootstrap replicate has finite estimates.")
        k = self.layout.k
        values = self._evaluate(rows[:, self.order], horizon, perm)
        return values.reshape(len(rows), len(VARIANTS), horizon + 1, k, k)
