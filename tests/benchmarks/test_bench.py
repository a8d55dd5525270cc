"""The benchmark run as tests (issue 3, item 6): run with `pytest -m bench tests/benchmarks -s`.

Speed is reported, never asserted (DESIGN.md section 6: ratios against a peer in the same
process, not timed pass/fail tests). What is asserted is that the timed fits are the
like-for-like ones the ratios claim: every fit converged, and semopy fitting the same window
model (same item intercepts) agrees with Lagwise's lagged paths. Peak memory is a size, not
a time: the long-diary run must stay under 1 GB (issue 3, item 6).
Marked `slow` as well as `bench` so the default run (-m 'not slow') leaves them out.
"""

from __future__ import annotations

import numpy as np
import pytest

from models.benchmark import (
    MEMORY_CASE, MEMORY_TARGET_BYTES, SPEED_CASES, BenchReport, format_report, measure_memory,
    measure_speed,
)

pytestmark = pytest.mark.bench


@pytest.mark.parametrize("case", SPEED_CASES, ids=lambda c: f"{c.states}x{c.items}-T{c.occasions}")
def test_speed_against_semopy(case):
    result = measure_speed(case, repeats=3)
    print("\n" + format_report(BenchReport(speed=[result], repeats=3)))
    assert result.lagwise_converged and result.stationary_converged
    for peer in result.peers:
        if peer.seconds is None:
            continue
        assert peer.converged
        if "same item intercepts" in peer.name:
            # semopy at its default tolerance on the identical model
            assert peer.max_path_difference < 1e-3
    assert np.isfinite(result.stationary_ratio)


def test_peak_memory_of_a_long_diary():
    result = measure_memory(MEMORY_CASE)
    print("\n" + format_report(BenchReport(memory=result)))
    assert result.converged
    assert result.peak_bytes < MEMORY_TARGET_BYTES
