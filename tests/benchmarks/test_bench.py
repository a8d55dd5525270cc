"""The benchmark run as tests: run with `pytest -m bench tests/benchmarks -s`.

Speed is reported, never asserted (DEVELOPERS.md, "Speed": ratios against a peer in the same
process, not timed pass/fail tests). What is asserted is that the timed fits are the
like-for-like ones the ratios claim: every fit converged, semopy fitting the same window
model agrees with Lagwise's lagged paths (models.reference_sem: exactly with the same mean
structure, means="states"; closely with free window means, the covariance-only peer the speed
target applies to), a refit started from a previous result finds the full fit's maximum, and
Lagwise's filter gives statsmodels' log-likelihood at statsmodels' own one-factor estimate.
Peak memory is a size, not a time: the long-diary runs must stay under 1 GB (the memory
targets of `lagwise bench`). Marked `bench`, which the default run (-m 'not slow and not
bench') leaves out.
"""

from __future__ import annotations

import numpy as np
import pytest

from lagwise.models.bench import (
    EXACT_CASE, EXACT_MEMORY_CASE, EXACT_SIZES, MEMORY_CASE, MEMORY_TARGET_BYTES,
    REFIT_REPLICATES, SPEED_CASES, BenchReport, format_report, measure_exact_evaluation,
    measure_exact_speed, measure_memory, measure_refit, measure_speed,
)

pytestmark = pytest.mark.bench


def case_id(case) -> str:
    return f"{case.states}x{case.items}-T{case.occasions}"


@pytest.mark.parametrize("case", SPEED_CASES, ids=case_id)
def test_speed_against_semopy(case):
    result = measure_speed(case, repeats=3)
    print("\n" + format_report(BenchReport(speed=[result], repeats=3)))
    assert result.lagwise_converged and result.stationary_converged
    assert sum(peer.target and peer.seconds is not None for peer in result.peers) == 1
    for peer in result.peers:
        if peer.seconds is None:
            continue
        assert peer.converged
        if peer.same_model:
            # semopy at its default tolerance on the identical model
            assert peer.max_path_difference < 1e-3
        else:
            # the same covariance structure with the window means left free: close, well
            # inside the lagged paths' standard errors (about 0.07 at T = 200)
            assert peer.max_path_difference < 1e-2
        assert np.isfinite(peer.ratio)
    assert np.isfinite(result.stationary_ratio)


@pytest.mark.parametrize("case", SPEED_CASES, ids=case_id)
def test_refit_finds_the_full_fit(case):
    result = measure_refit(case, REFIT_REPLICATES)
    print("\n" + format_report(BenchReport(refit=[result])))
    assert result.converged
    # both maximise the same likelihood from different starts: the same estimates, to a
    # small fraction of a standard error
    assert result.max_difference_se < 1e-3
    assert np.isfinite(result.speedup)


def test_peak_memory_of_a_long_diary():
    result = measure_memory(MEMORY_CASE)
    print("\n" + format_report(BenchReport(memory=result)))
    assert result.converged
    assert result.peak_bytes < MEMORY_TARGET_BYTES


def test_exact_speed_against_statsmodels():
    result = measure_exact_speed(EXACT_CASE, repeats=3)
    print("\n" + format_report(BenchReport(exact_speed=result, repeats=3)))
    assert result.lagwise_converged
    # the peer runs the same filter: at statsmodels' estimate, Lagwise's Kalman filter (one
    # segment, one state, AR(1), constants) gives statsmodels' log-likelihood
    assert result.peer_check <= 1e-8 * abs(result.peer_loglik)
    assert np.isfinite(result.ratio)


@pytest.mark.parametrize("one_segment", [False, True], ids=["days", "one segment"])
def test_exact_evaluation_cost_by_length(one_segment):
    evaluations = measure_exact_evaluation(EXACT_SIZES, repeats=3, one_segment=one_segment)
    report = (BenchReport(exact_segment_evaluations=evaluations, repeats=3) if one_segment
              else BenchReport(exact_evaluations=evaluations, repeats=3))
    print("\n" + format_report(report))
    assert [e.occasions for e in evaluations] == list(EXACT_SIZES)
    # the same model at its true parameters on ever longer diaries: the log-likelihood per
    # prompt settles (law of large numbers), so each evaluation covered its whole diary
    per_prompt = np.array([e.loglik / e.occasions for e in evaluations])
    assert np.all(np.isfinite(per_prompt))
    assert np.ptp(per_prompt) < 0.05 * abs(per_prompt[-1])


def test_exact_peak_memory_of_a_long_diary():
    result = measure_memory(EXACT_MEMORY_CASE, estimator="exact")
    print("\n" + format_report(BenchReport(exact_memory=result)))
    assert result.converged
    assert result.peak_bytes < MEMORY_TARGET_BYTES


def test_continuous_time_against_exact():
    # the same 1,000 prompts fitted in continuous time (their times) and by the exact
    # estimator (equal spacing): both complete fits converge; the ratio is reported
    from lagwise.models.bench.continuous import measure_continuous_speed
    result = measure_continuous_speed(EXACT_CASE)
    print("\n" + format_report(BenchReport(continuous_speed=result)))
    assert result.converged and result.exact_converged
    assert result.distinct_intervals > 500 and np.isfinite(result.ratio)
