"""The size of the likelihood-ratio test that Compare shows for window estimators.

Monte Carlo with known truth: diaries simulated from tests/two_state_model.py with the
cross-lagged path calm (t-1) -> drive (t) set to 0, fitted with that path free and fixed at 0
on depth-2 lag windows (where every occasion enters three windows). Under this null the
scaled difference statistic (Satorra & Bentler 2001) is approximately chi-square(1): mean 1
(standard result) and a 5% test rejects 3-8% of diaries; the unscaled LR rejects about 13%
(measured: 400 diaries, mean LR 1.6).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import pytest
from scipy.stats import binom, chi2

from two_state_model import SPEC, TRUE
from lagwise.models.compare import difference_scaling
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.parallel import run_tasks
from lagwise.models.simulate import simulate_diary

NESTED = SPEC.with_paths(1, np.array([[True, True], [False, True]]))
NULL = dict(TRUE, lagged=[np.array([[0.45, 0.15], [0.0, 0.3]])])   # the tested path is 0
DEPTH2 = FitOptions(depth=2)


def _pair(seed: int) -> tuple[float, float]:
    """(LR, Satorra-Bentler scaling c_d) of the nested pair on one simulated diary."""
    diary = simulate_diary(SPEC, **NULL, days=40, prompts_per_day=6, p_missed=0.2, seed=seed)
    full, small = fit(diary, SPEC, DEPTH2), fit(diary, NESTED, DEPTH2)
    assert full.converged and small.converged
    return 2.0 * (full.fit.loglik - small.fit.loglik), difference_scaling(small.fit, full.fit)


@lru_cache(maxsize=None)
def _study(replications: int, seed0: int) -> tuple[np.ndarray, np.ndarray]:
    pairs = list(run_tasks(_pair, [(seed0 + r,) for r in range(replications)]))
    lr, c = (np.array(values, dtype=float) for values in zip(*pairs))
    return np.maximum(lr, 0.0), c


def test_scaled_difference_test_is_sized_small_version():
    # 150 replications: rejections at .05 within the central 99% of Binomial(150, 0.05), a
    # band the unscaled LR (rejecting about 12%) leaves with probability above 0.7; and the
    # scaled statistic's Monte Carlo mean within 3.5 standard errors of 1 (chi-square(1)).
    n = 150
    low, high = binom.ppf(0.005, n, 0.05), binom.isf(0.005, n, 0.05)
    assert binom.sf(high, n, 0.12) > 0.7
    lr, c = _study(n, seed0=500)
    assert np.all(c > 0)
    scaled = lr / c
    assert low <= np.sum(chi2.sf(scaled, 1) < 0.05) <= high
    se = scaled.std(ddof=1) / np.sqrt(n)
    assert abs(scaled.mean() - 1.0) <= 3.5 * se, (scaled.mean(), se)


@pytest.mark.slow
def test_scaled_difference_test_is_sized_400_replications():
    lr, c = _study(400, seed0=5000)
    scaled = lr / c
    rate, raw = float(np.mean(chi2.sf(scaled, 1) < 0.05)), float(np.mean(chi2.sf(lr, 1) < 0.05))
    print(f"\nnested pair on depth-2 windows, 400 diaries: scaled test rejects {rate:.3f}, "
          f"unscaled LR {raw:.3f}; mean scaling {c.mean():.2f}, mean LR {lr.mean():.2f}")
    assert 0.03 <= rate <= 0.08
