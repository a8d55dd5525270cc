"""The values' JSON: every to_json/from_json pair round-trips, and strict from_json names the
exact bad field (models.jsonread), with the path prefix a containing document gives it."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lagwise.models import jsonread as jr
from lagwise.models.diary import TIME_MODES, TimeSettings
from lagwise.models.errors import FieldError, LagwiseError, SpecError
from lagwise.models.flags import Flag, FlagCode
from lagwise.models.kinds import Kind
from lagwise.models.results import FitIndices, FitResult, Parameter, StateScores
from lagwise.models.estimators import ESTIMATORS, FitOptions
from lagwise.models.spec import IDENTIFICATIONS, INNOVATION_FORMS, ModelSpec, State, make_spec

ROUND_TRIPS = settings(max_examples=60, deadline=None,
                       suppress_health_check=[HealthCheck.too_slow])


def through_a_file(doc: dict) -> dict:
    """The document as written to and read from a file (strict parse included)."""
    return jr.parse(json.dumps(doc, allow_nan=False))


# ------------------------------------------------------------------------ strategies

# names hold no control character or bidirectional override, texts only line breaks and
# tabs besides (models.names refuses the others)
printable = st.characters(exclude_categories=("Cc", "Cs"),
                          exclude_characters="\u202a\u202b\u202c\u202d\u202e"
                                             "\u2066\u2067\u2068\u2069")
names = st.text(printable, min_size=1, max_size=8)
texts = st.text(printable | st.sampled_from("\n\r\t"), max_size=20)
finite = st.floats(allow_nan=False, allow_infinity=False)
maybe = st.none() | finite


def masks(k: int):
    return st.lists(st.lists(st.booleans(), min_size=k, max_size=k).map(tuple),
                    min_size=k, max_size=k).map(tuple)


@st.composite
def specs(draw, estimable: bool = False):
    """Specifications; with `estimable`, ones that pass ModelSpec.validate."""
    k = draw(st.integers(1, 3))
    state_names = draw(st.lists(names.filter(str.strip), min_size=k, max_size=k, unique=True))
    states = []
    for j, name in enumerate(state_names):
        if estimable:
            items = tuple(f"s{j}i{m}" for m in range(draw(st.integers(1, 3))))
        else:
            items = tuple(draw(st.lists(names, max_size=3)))
        marker = draw(st.none() | st.sampled_from(items)) if items else None
        states.append(State(name, items, marker))
    lags = draw(st.integers(1, 2) if estimable else st.integers(0, 2))
    paths = draw(st.none() | st.tuples(*[masks(k)] * lags)) if lags else None
    used = sorted({item for s in states for item in s.items})
    pairs = [(a, b) for a in state_names for b in state_names if a < b]
    return ModelSpec(
        states=tuple(states), lags=lags, paths=paths,
        identification=draw(st.sampled_from(IDENTIFICATIONS)),
        innovations=draw(st.sampled_from(INNOVATION_FORMS)),
        partial_zeros=tuple(draw(st.lists(st.sampled_from(pairs), unique=True))) if pairs
        else (),
        reliability=tuple((item, draw(st.floats(0.01, 1.0))) for item in
                          draw(st.lists(st.sampled_from(used), unique=True, max_size=2)))
        if used else (),
        unique_autocorrelation=tuple(draw(st.lists(st.sampled_from(used), unique=True,
                                                   max_size=2))) if used else (),
    )


@st.composite
def options(draw) -> FitOptions:
    """Settings an estimator takes (models.estimators refuses the others)."""
    method = ESTIMATORS[draw(st.sampled_from(sorted(ESTIMATORS)))]
    takes = {"depth": st.none() | st.integers(0, 50), "night_gap": st.none() | st.integers(0, 99),
             "interval_unit": st.none() | st.sampled_from(["minutes", "hours", "days"]),
             "night": st.none() | st.sampled_from(["restart", "carry"]),
             "prompt_spacing": st.none() | st.floats(0.01, 1e6)}
    return FitOptions(estimator=method.name, missing=draw(st.sampled_from(method.missing)),
                      max_iter=draw(st.integers(1, 10_000_000)),
                      **{name: draw(values) for name, values in takes.items()
                         if name in method.settings})
times = st.builds(TimeSettings, mode=st.sampled_from(TIME_MODES), day=st.none() | names,
                  prompt=st.none() | names, time=st.none() | names,
                  max_gap_minutes=st.none() | st.floats(0.5, 1e8), days_independent=st.booleans())
parameters = st.builds(Parameter, kind=st.sampled_from(list(Kind)), from_=names, to=names, estimate=finite, se=maybe,
                       standardized=maybe, free=st.booleans(), lag=st.integers(0, 2))
indices = st.builds(FitIndices, chi2=maybe, df=st.integers(-5, 10**6), p=maybe, rmsea=maybe,
                    rmsea_ci=st.none() | st.tuples(finite, finite), rmsea_pclose=maybe, cfi=maybe,
                    tli=maybe, srmr=maybe, loglik=finite, aic=finite, bic=finite,
                    n_free=st.integers(0, 500), n_obs=st.integers(0, 10**6),
                    exact=st.booleans())


@st.composite
def results(draw):
    spec = draw(specs(estimable=True))
    p, k = len(spec.items), spec.k
    cells = st.floats(width=64)  # NaN and infinities too: to_json writes them as null

    def matrix(*shape):
        return np.array(draw(st.lists(cells, min_size=int(np.prod(shape)),
                                      max_size=int(np.prod(shape))))).reshape(shape)

    fit_options = draw(options())
    uses_windows = fit_options.method.uses_windows
    n = draw(st.integers(0, 4))

    def scores(rows, columns):
        return st.builds(lambda *tables: StateScores(*tables),
                         *[st.just(matrix(rows, columns))] * 4)

    return FitResult(
        spec=spec, options=fit_options, estimator=draw(st.sampled_from(sorted(ESTIMATORS))),
        converged=draw(st.booleans()), message=draw(texts),
        iterations=draw(st.integers(0, 10**6)), seconds=draw(st.floats(0, 1e4)),
        n_windows=draw(st.integers(0, 10**5)), n_occasions=draw(st.integers(0, 10**5)),
        parameters=tuple(draw(st.lists(parameters, max_size=4))), fit=draw(indices),
        loadings=matrix(p, k), intercepts=matrix(p), unique=matrix(p),
        lagged=tuple(matrix(k, k) for _ in range(spec.lags)), innovation=matrix(k, k),
        latent_cov=matrix(k, k), r_squared=matrix(p), spectral_radius=draw(cells),
        flags=tuple(Flag(code, text) for code, text in draw(st.lists(
            st.tuples(st.sampled_from(list(FlagCode)), texts), max_size=2))),
        notes=tuple(draw(st.lists(texts, max_size=2))),
        newton_steps=draw(st.integers(0, 10)),
        depth=draw(st.none() | st.integers(0, 50)) if uses_windows else None,
        state_scores=None if uses_windows else draw(st.none() | scores(n, k)),
        start_loglik_windows=None if uses_windows else draw(st.none() | finite),
    )


# ------------------------------------------------------------------------ round trips

@ROUND_TRIPS
@given(specs())
def test_any_specification_round_trips_finished_or_not(spec):
    assert ModelSpec.from_json(through_a_file(spec.to_json()), validate=False) == spec
    for state in spec.states:
        assert State.from_json(through_a_file(state.to_json())) == state


@ROUND_TRIPS
@given(specs(estimable=True))
def test_an_estimable_specification_round_trips_validated(spec):
    assert ModelSpec.from_json(through_a_file(spec.to_json())) == spec


@ROUND_TRIPS
@given(options(), times)
def test_settings_round_trip(fit_options, time_settings):
    assert FitOptions.from_json(through_a_file(fit_options.to_json())) == fit_options
    assert TimeSettings.from_json(through_a_file(time_settings.to_json())) == time_settings


@ROUND_TRIPS
@given(parameters, indices)
def test_parameter_rows_and_fit_indices_round_trip(parameter, fit):
    assert Parameter.from_json(through_a_file(parameter.to_json())) == parameter
    assert FitIndices.from_json(through_a_file(fit.to_json())) == fit


@ROUND_TRIPS
@given(results())
def test_results_round_trip(result):
    doc = through_a_file(result.to_json())
    again = FitResult.from_json(doc)
    assert again.to_json() == doc
    np.testing.assert_array_equal(again.loadings, np.where(np.isfinite(result.loadings),
                                                           result.loadings, np.nan))


# ------------------------------------------------------------------------ strict fields

SPEC = make_spec({"calm": ["c1", "c2", "c3"], "tense": ["t1", "t2"]})


def _result_doc() -> dict:
    k, p = SPEC.k, len(SPEC.items)
    row = Parameter("loading", "calm", "c1", 1.0, None, 0.8, False)
    fit = FitIndices(1.0, 3, 0.5, 0.01, (0.0, 0.1), 0.9, 0.99, 0.98, 0.02, -10.0, 30.0, 40.0,
                     10, 200)
    return FitResult(
        spec=SPEC, options=FitOptions(), estimator="stationary", converged=True, message="",
        iterations=3, seconds=0.1, n_windows=100, n_occasions=120, parameters=(row,) * 5,
        fit=fit, loadings=np.ones((p, k)), intercepts=np.zeros(p), unique=np.ones(p),
        lagged=(np.eye(k) * 0.3,), innovation=np.eye(k), latent_cov=np.eye(k),
        r_squared=np.full(p, 0.5), spectral_radius=0.3).to_json()


def _set(doc: dict, path: tuple, value) -> dict:
    doc = json.loads(json.dumps(doc))
    inner = doc
    for key in path[:-1]:
        inner = inner[key]
    if value is _DELETE:
        del inner[path[-1]]
    else:
        inner[path[-1]] = value
    return doc


_DELETE = object()

# (reader, document, key path to spoil, value, where the error must point, problem)
BAD_FIELDS = [
    (State.from_json, SPEC.states[0].to_json(), ("items", 1), 3, "items[1]",
     "should be text, not a number"),
    (State.from_json, SPEC.states[0].to_json(), ("name",), _DELETE, "",
     "lacks the field 'name'"),
    (ModelSpec.from_json, SPEC.to_json(), ("states", 1, "marker"), ["t1"], "states[1].marker",
     "should be text, not a list"),
    (ModelSpec.from_json, SPEC.to_json(), ("lags",), 3, "lags",
     "should lie between 0 and 2, not 3"),
    (ModelSpec.from_json, SPEC.to_json(), ("paths",), [[[True, False], [True]]], "paths[0][1]",
     "should hold 2 true/false values"),
    (ModelSpec.from_json, SPEC.to_json(), ("paths",), [[[True, 1], [True, True]]],
     "paths[0][0][1]", "should be true or false, not a number"),
    (ModelSpec.from_json, SPEC.to_json(), ("reliability",), {"t1": "high"}, "reliability.t1",
     "should be a number, not text"),
    (ModelSpec.from_json, SPEC.to_json(), ("partial_zeros",), [["calm"]], "partial_zeros[0]",
     "should name two states"),
    (ModelSpec.from_json, SPEC.to_json(), ("innovations",), "diagonal", "innovations",
     "should be one of free, independent, partial, not 'diagonal'"),
    (FitOptions.from_json, FitOptions().to_json(), ("estimator",), "fast", "estimator",
     "should be one of stationary, first-copy-free, exact, continuous-time, not 'fast'"),
    (FitOptions.from_json, FitOptions().to_json(), ("missing",), _DELETE, "",
     "lacks the field 'missing'"),
    (FitOptions.from_json, FitOptions().to_json(), ("night_gap",), "2", "night_gap",
     "should be a whole number, not text"),
    (TimeSettings.from_json, TimeSettings().to_json(), ("max_gap_minutes",), 0, "max_gap_minutes",
     "should be more than 0 and at most 1e8 minutes"),
    (TimeSettings.from_json, TimeSettings().to_json(), ("zone",), "UTC", "",
     "has an unknown field 'zone'"),
    (Parameter.from_json, _result_doc()["parameters"][0], ("free",), "yes", "free",
     "should be true or false, not text"),
    (FitIndices.from_json, _result_doc()["fit"], ("df",), 2.5, "df",
     "should be a whole number, not a number"),
    (FitIndices.from_json, _result_doc()["fit"], ("rmsea_ci",), [0.1], "rmsea_ci",
     "should hold 2 numbers"),
    (FitResult.from_json, _result_doc(), ("parameters", 3, "se"), "0.1", "parameters[3].se",
     "should be a number, not text"),
    (FitResult.from_json, _result_doc(), ("spec", "states", 0, "items", 0), None,
     "spec.states[0].items[0]", "should be text, not null"),
    (FitResult.from_json, _result_doc(), ("options", "depth"), 51, "options.depth",
     "should lie between 0 and 50, not 51"),
    (FitResult.from_json, _result_doc(), ("fit", "loglik"), "x", "fit.loglik",
     "should be a number, not text"),
    (FitResult.from_json, _result_doc(), ("matrices", "loadings"), [[1.0, 0.0]],
     "matrices.loadings", "should have 5 rows"),
    (FitResult.from_json, _result_doc(), ("matrices", "lagged", 0, 1, 0), True,
     "matrices.lagged[0][1][0]", "should be a number, not true/false"),
    (FitResult.from_json, _result_doc(), ("cautions", 0), 7, "cautions[0]",
     "should be text, not a number"),
]


@pytest.mark.parametrize("reader, doc, path, value, where, problem", BAD_FIELDS,
                         ids=[f"{c[0].__qualname__}:{c[4] or c[5]}" for c in BAD_FIELDS])
def test_strict_from_json_names_the_exact_field(reader, doc, path, value, where, problem):
    bad = _set(doc, path, value)
    reader(doc)  # the document itself is fine
    with pytest.raises(FieldError) as caught:
        reader(bad)
    assert (caught.value.where, caught.value.problem) == (where, problem)
    assert isinstance(caught.value, ValueError) and isinstance(caught.value, LagwiseError)

    # inside a larger document the path carries that document's prefix
    with pytest.raises(FieldError) as caught:
        reader(bad, where="results")
    expected = f"results.{where}" if where else "results"
    assert caught.value.where == expected
    assert str(caught.value) == f"{expected}: {problem}"


def test_validation_is_kept_for_models_and_results_but_can_be_left_out():
    draft = make_spec({"calm": ["c1", "c2"], "empty": []}).to_json()
    with pytest.raises(SpecError, match="no items"):
        ModelSpec.from_json(draft)
    assert ModelSpec.from_json(draft, validate=False).state_names == ("calm", "empty")
    with pytest.raises(ValueError) as caught:  # a result's model was estimated: it must validate
        FitResult.from_json(_set(_result_doc(), ("spec",), draft), where="results")
    assert caught.value.where == "results.spec" and "no items" in caught.value.problem


def test_results_read_null_as_not_available():
    doc = _set(_set(_result_doc(), ("fit", "loglik"), None), ("matrices", "unique", 2), None)
    result = FitResult.from_json(doc)
    assert np.isnan(result.fit.loglik) and np.isnan(result.unique[2])
    assert result.to_json()["fit"]["loglik"] is None
    assert FitResult.from_json(_set(doc, ("cautions",), [])).cautions == \
        FitResult.from_json(_set(doc, ("cautions",), _DELETE)).cautions != ()


# ------------------------------------------------------------------------ bounded parsing

@pytest.mark.parametrize("text, problem", [
    ('{"a": NaN}', "holds NaN, which is not a number JSON allows"),
    ('[1e400]', "holds a number too large to use (1e400)"),
    ('[' + "9" * 25 + ']', "holds a number too large to use (" + "9" * 25 + "...)"),
    ('{"a": 1, "a": 2}', "names the field 'a' twice in one object"),
    ("[" * 40 + "]" * 40, f"nests lists and objects more than {jr.MAX_DEPTH} levels deep"),
    ('{"' + "k" * (jr.MAX_NAME + 1) + '": 1}',
     f"has a field name longer than {jr.MAX_NAME} characters"),
])
def test_parse_refuses_what_is_beyond_the_bounds(text, problem):
    with pytest.raises(FieldError) as caught:
        jr.parse(text)
    assert (caught.value.where, caught.value.problem) == ("", problem)
    assert str(caught.value) == f"the document {problem}"
