"""The bootstrap of a fit (models.bootstrap, models.resampling).

Data: diaries simulated from the two-state model of tests/two_state_model.py (known truth:
the coverage study compares intervals with the true paths) and small tables of our own.
Every check names its source beside it.
"""

from __future__ import annotations

import json
import time

import numpy as np
import pandas as pd
import pytest
from arch.bootstrap import IIDBootstrap, optimal_block_length

from lagwise.models import bootstrap as bootstrap_module
from lagwise.models import jsonread as jr
from lagwise.models.bootstrap import Bootstrap, bootstrap
from lagwise.models.diary import Diary
from lagwise.models.errors import Cancelled, EstimationError, FieldError
from lagwise.models.estimate import fit
from lagwise.models.kinds import Kind
from lagwise.models.resampling import (BLOCKS, DAYS, block_length, block_series, resample_blocks,
                                       resample_segments, resampler, segment_rows)
from lagwise.models.results import Parameter
from lagwise.models.simulate import simulate_diary
from two_state_model import SPEC, TRUE

STATES = SPEC.state_names


def _diary(seed: int, days: int = 30, prompts: int = 7) -> Diary:
    return simulate_diary(SPEC, **TRUE, days=days, prompts_per_day=prompts, p_missed=0.15,
                          p_item_skip=0.03, seed=seed)


def _joined(diary: Diary) -> Diary:
    """The same answers with the days joined into one segment (windows span nights)."""
    return Diary(items=diary.items, values=diary.values, segment=np.zeros_like(diary.segment),
                 day=diary.day, day_labels=diary.day_labels, prompt=diary.prompt)


def _true_path(kind: str, from_: str, to: str) -> float:
    return float(TRUE["lagged"][0][STATES.index(to), STATES.index(from_)])


# ----- resampling ----------------------------------------------------------------------------
def test_day_resampling_draws_whole_days():
    # The day bootstrap resamples independent units whole (Efron 1979; clustered data:
    # Davison & Hinkley 1997, ch. 3): every resampled segment is one original day, answers,
    # missed prompts and prompt numbers included, and keeps a segment of its own.
    diary = _diary(1, days=12)
    assert resampler(diary).method == DAYS
    originals = [(diary.values[r], diary.prompt[r], diary.day_labels[diary.day[r[0]]])
                 for r in segment_rows(diary)]
    drawn_days = set()
    for seed in range(5):
        again = resample_segments(diary, np.random.default_rng(seed))
        rows = segment_rows(again)
        assert len(rows) == len(originals) and again.n_occasions == sum(r.size for r in rows)
        for r in rows:
            values, prompt, label = again.values[r], again.prompt[r], again.day_labels[again.day[r[0]]]
            matches = [n for n, (v, p, lab) in enumerate(originals)
                       if v.shape == values.shape and np.array_equal(v, values, equal_nan=True)
                       and np.array_equal(p, prompt) and lab == label]
            assert len(matches) == 1
            assert np.all(again.day[r] == again.day[r[0]])
            drawn_days.add(matches[0])
    assert len(drawn_days) > len(originals) // 2    # draws with replacement reach most days


def test_joined_days_use_stationary_blocks_with_the_optimal_block_length():
    # Politis & White (2004, corrected 2009) through arch.bootstrap.optimal_block_length on
    # the series stated in models/resampling.py, rebuilt here with pandas: items standardized
    # over their answers (divisor n), averaged over the items answered at each occasion,
    # occasions without an answer left out.
    diary = _joined(_diary(2, days=20))
    plan = resampler(diary)
    frame = pd.DataFrame(diary.values)
    z = (frame - frame.mean()) / frame.std(ddof=0)
    series = z.mean(axis=1, skipna=True).dropna().to_numpy()
    np.testing.assert_allclose(block_series(diary), series)
    expected = float(optimal_block_length(series)["stationary"].iloc[0])
    assert plan.method == BLOCKS and plan.block_length == pytest.approx(max(1.0, expected))
    assert block_length(diary) == plan.block_length
    # the stationary bootstrap (Politis & Romano 1994) moves whole occasions onto the grid
    again = resample_blocks(diary, plan.block_length, np.random.default_rng(0))
    assert np.array_equal(again.segment, diary.segment) and np.array_equal(again.day, diary.day)
    originals = {tuple(np.nan_to_num(row, nan=-999.0)) for row in diary.values}
    assert all(tuple(np.nan_to_num(row, nan=-999.0)) in originals for row in again.values)


def test_a_diary_with_joined_days_is_bootstrapped_in_stationary_blocks():
    # Politis & Romano (1994) when windows span nights: the plan, its block length and the
    # JSON carry the method; every replicate refits the same model (definition).
    diary = _joined(_diary(4, days=10))
    result = fit(diary, SPEC)
    made = bootstrap(diary, SPEC, result.options, result, replicates=6, jobs=1)
    assert made.method == BLOCKS
    assert made.block_length == resampler(diary.select(SPEC.items)).block_length
    assert made.used + made.failed == 6 and made.used > 0
    assert Bootstrap.from_json(jr.parse(json.dumps(made.to_json()))).block_length == made.block_length


# ----- running -------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def small():
    diary = _diary(7, days=14)
    return diary, fit(diary, SPEC)


def test_the_answer_does_not_depend_on_the_number_of_workers(small):
    # numpy SeedSequence.spawn gives each replicate its own stream (numpy's documented way
    # to seed parallel work): one worker or two, the same estimates in the same order.
    diary, result = small
    one = bootstrap(diary, SPEC, result.options, result, replicates=12, seed=5, jobs=1)
    two = bootstrap(diary, SPEC, result.options, result, replicates=12, seed=5, jobs=2)
    assert one.failed == two.failed and one.used == 12 - one.failed
    np.testing.assert_array_equal(one.estimates, two.estimates)
    other = bootstrap(diary, SPEC, result.options, result, replicates=12, seed=6, jobs=1)
    assert not np.array_equal(one.estimates, other.estimates)
    assert one.estimates.shape == (one.used, len(result.free_parameters))


class _Stopper:
    """A monitor that asks to stop after `after` progress reports (models/progress.py)."""

    def __init__(self, after: int):
        self.after, self.reports = after, []

    def report(self, fraction: float, message: str) -> None:
        self.reports.append(fraction)

    def cancelled(self) -> bool:
        return len(self.reports) > self.after


def test_cancelling_stops_the_work_and_returns_nothing(small):
    # The monitor protocol (models/progress.py): checkpoint raises Cancelled; the workers'
    # remaining batches are dropped, and the next bootstrap runs as usual.
    diary, result = small
    stopper = _Stopper(after=2)
    started = time.perf_counter()
    with pytest.raises(Cancelled):
        bootstrap(diary, SPEC, result.options, result, replicates=400, jobs=2, monitor=stopper)
    assert time.perf_counter() - started < 60
    assert max(stopper.reports) < 0.5
    again = bootstrap(diary, SPEC, result.options, result, replicates=4, jobs=2)
    assert again.used + again.failed == 4


def test_failed_replicates_are_counted_and_left_out(small, monkeypatch):
    # Bookkeeping (definition): a refit that raises is counted as failed, not kept.
    diary, result = small
    calls = {"n": 0}

    def flaky(*args, **kwargs):
        calls["n"] += 1
        if calls["n"] % 3 == 0:
            raise EstimationError("no estimate")
        return fit(*args, **kwargs)

    monkeypatch.setattr(bootstrap_module, "fit", flaky)     # jobs=1 runs in this process
    done = bootstrap(diary, SPEC, result.options, result, replicates=9, jobs=1)
    assert done.failed >= 3 and done.used == 9 - done.failed
    assert done.warning.startswith(f"{done.failed} of 9 bootstrap replicates failed")


# ----- intervals -----------------------------------------------------------------------------
def test_percentile_and_bias_corrected_intervals_match_arch():
    # arch's IIDBootstrap.conf_int, methods "percentile" (Efron 1979) and "bc" (Efron 1981),
    # on the same bootstrap estimates (the same seed draws the same replicates).
    x = np.random.default_rng(3).gamma(2.0, size=(60, 2))

    def statistic(data):
        return np.array([np.mean(data[:, 0]), np.median(data[:, 1])])

    estimates = IIDBootstrap(x, seed=11).apply(statistic, 999)
    base = statistic(x)
    parameters = tuple(Parameter(kind=Kind.INERTIA, from_=f"s{j}", to=f"s{j}", estimate=float(base[j]),
                                 se=None, standardized=None, free=True, lag=1) for j in range(2))
    made = Bootstrap(parameters, 999, estimates, 0, 11, DAYS)
    for method, ours in (("percentile", made.percentile(0.9)), ("bc", made.bias_corrected(0.9))):
        lower, upper = IIDBootstrap(x, seed=11).conf_int(statistic, 999, method=method, size=0.9)
        np.testing.assert_allclose([i.lower for i in ours], lower, rtol=1e-12)
        np.testing.assert_allclose([i.upper for i in ours], upper, rtol=1e-12)
    # stability (definition): the share of replicates with the estimate's sign
    stable = made.stability(0.9)
    assert [s.same_sign for s in stable] == [float(np.mean(estimates[:, j] > 0)) for j in range(2)]
    assert all(s.excludes_zero for s in stable)


def test_json_round_trip_and_strict_reading(small):
    # The project's strict JSON rules (models/jsonread.py): every field checked, the stored
    # intervals must agree with the estimates they come from.
    diary, result = small
    made = bootstrap(diary, SPEC, result.options, result, replicates=6, jobs=1)
    doc = jr.parse(json.dumps(made.to_json(), allow_nan=False))
    assert {"replicates", "failed", "seed", "method", "block_length", "intervals", "stability",
            "estimates"} <= set(doc)
    assert len(doc["intervals"]["percentile"]) == len(result.free_parameters)
    assert {s["kind"] for s in doc["stability"]} <= {"inertia", "cross_lagged", "lag2"}
    back = Bootstrap.from_json(doc)
    np.testing.assert_array_equal(back.estimates, made.estimates)
    assert back.percentile() == made.percentile() and back.method == made.method
    tampered = json.loads(json.dumps(doc))
    tampered["intervals"]["percentile"][0]["lower"] += 0.5
    with pytest.raises(FieldError, match=r"bootstrap.intervals.percentile\[0\].lower"):
        Bootstrap.from_json(tampered, "bootstrap")
    unknown = dict(doc, extra=1)
    with pytest.raises(FieldError, match="unknown field 'extra'"):
        Bootstrap.from_json(unknown)
    with pytest.raises(FieldError, match="estimates"):
        Bootstrap.from_json(dict(doc, estimates=doc["estimates"][:-1]))


# ----- coverage on diaries with known truth ---------------------------------------------------
def _coverage(diaries: int, replicates: int, first_seed: int, days: int = 80,
              prompts: int = 10) -> tuple[float, float, int]:
    """Percentile coverage of the true lagged paths, mean width over the model-based 95%
    interval width (2 x 1.96 SE), and the number of intervals."""
    covered, widths = [], []
    for r in range(diaries):
        diary = _diary(first_seed + r, days=days, prompts=prompts)
        result = fit(diary, SPEC)
        made = bootstrap(diary, SPEC, result.options, result, replicates=replicates, seed=r)
        for path in made.stability():
            truth = _true_path(path.kind, path.from_, path.to)
            covered.append(path.lower <= truth <= path.upper)
            widths.append((path.upper - path.lower)
                          / (2 * 1.96 * result.get(path.kind, path.from_, path.to).se))
    return float(np.mean(covered)), float(np.mean(widths)), len(covered)


def test_small_coverage_study_of_the_lagged_paths():
    # Simulation with known truth (tests/two_state_model.py; 80 days x 10 prompts, 15%
    # missed): 20 diaries x 59 day-bootstrap replicates, 4 lagged paths each. Monte Carlo
    # error of the coverage: about sqrt(.95 x .05 / 80) = .024 (the paths of one diary are
    # correlated, so somewhat more); the band, .85 and above, is 4 of those below .95. The
    # widths are compared with the model-based intervals (estimate -+ 1.96 SE from the
    # information), a route this code does not take: a bootstrap that resampled too little or
    # too much would be too narrow or too wide.
    coverage, width, n = _coverage(diaries=20, replicates=59, first_seed=500)
    assert n == 80
    assert 0.85 <= coverage <= 1.0
    assert 0.8 <= width <= 1.25


@pytest.mark.slow
def test_coverage_study_of_the_lagged_paths():
    # Simulation with known truth: 150 diaries x 199 replicates, 600 intervals; Monte Carlo
    # error sqrt(.95 x .05 / 600) = .009. Percentile coverage of the 95% intervals within
    # .92 - .98. (Shorter diaries, e.g. 60 days x 8 prompts, cover less: the lagged paths'
    # small-sample bias shifts a percentile interval twice.)
    coverage, width, n = _coverage(diaries=150, replicates=199, first_seed=2000)
    assert n == 600
    assert 0.92 <= coverage <= 0.98
    assert 0.85 <= width <= 1.2


def test_a_dask_cluster_gives_the_same_answer(small):
    # the replicates' seeds travel with them: a LocalCluster (dask.distributed) on this
    # machine gives the estimates of one local worker, in the same order
    from distributed import LocalCluster

    diary, result = small
    one = bootstrap(diary, SPEC, result.options, result, replicates=8, seed=5, jobs=1)
    # one worker thread: BLAS threads are set per process, so fits must not overlap in one
    with LocalCluster(host="127.0.0.1", protocol="tcp://", processes=False, n_workers=1,
                      threads_per_worker=1, dashboard_address=None) as cluster:
        dask = bootstrap(diary, SPEC, result.options, result, replicates=8, seed=5,
                         scheduler=cluster.scheduler_address)
    np.testing.assert_array_equal(one.estimates, dask.estimates)
    assert one.failed == dask.failed
