"""The screening's ADF and KPSS tests (models.unitroot) against statsmodels' adfuller and kpss
called directly with the same settings, the bounded lag search, the per-series memory, and
the timestamp weekdays against pandas."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from statsmodels.tools.sm_exceptions import InterpolationWarning
from statsmodels.tsa.stattools import adfuller, kpss

from lagwise.models.diary import TimeSettings
from lagwise.models.recipe import DiaryRecipe
from lagwise.models.screening import screen_diary, screen_item, stationarity_tests, weekdays
from lagwise.models.timegrid import diary_from_frame
from lagwise.models.unitroot import MAX_ADF_LAG, adf, adf_max_lag, kpss_level
from lagwise.resources import demo_diary_path


def statsmodels_adf(x, max_lag):
    """statsmodels adfuller: constant, lag by AIC searched up to `max_lag`."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        stat, p, lag, *_ = adfuller(x, maxlag=max_lag, regression="c", autolag="AIC")
    return stat, p, lag


def statsmodels_kpss(x):
    """statsmodels kpss: level stationarity, automatic lags (Hobijn et al.)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", (FutureWarning, InterpolationWarning))
        stat, p, lags, _ = kpss(x, regression="c", nlags="auto")
    return stat, p, lags


def test_demo_screening_matches_statsmodels():
    diary = DiaryRecipe.of(None, TimeSettings(mode="grid", day="day", prompt="prompt")).read(
        demo_diary_path())
    screening = screen_diary(diary)
    for j, screen in enumerate(screening.items):
        column = diary.values[:, j]
        x = column[~np.isnan(column)]  # answered values, segments joined, gaps closed up
        stat, p, lag = statsmodels_adf(x, adf_max_lag(x.size))
        assert screen.adf.statistic == pytest.approx(stat, rel=1e-9)
        assert screen.adf.p == pytest.approx(p, rel=1e-9)
        assert screen.adf.lags == lag
        stat, p, lags = statsmodels_kpss(x)
        assert screen.kpss.statistic == pytest.approx(stat, rel=1e-9)
        assert screen.kpss.p == pytest.approx(p, rel=1e-12)
        assert screen.kpss.lags == lags


@pytest.mark.parametrize("n", [30, 400, 3000])
@pytest.mark.parametrize("kind", ["white noise", "random walk", "moving average"])
def test_tests_match_statsmodels(n, kind):
    rng = np.random.default_rng(n)
    e = rng.standard_normal(n + 2)
    x = {"white noise": e[2:], "random walk": np.cumsum(e[2:]),
         "moving average": 50 + e[2:] + 0.6 * e[1:-1] + 0.3 * e[:-2]}[kind]
    got = adf(x)
    want = statsmodels_adf(x, adf_max_lag(n))
    assert got[0] == pytest.approx(want[0], rel=1e-9)
    assert got[1] == pytest.approx(want[1], rel=1e-9, abs=1e-300)
    assert got[2] == want[2]
    got = kpss_level(x)
    want = statsmodels_kpss(x)
    assert got[:3] == pytest.approx(want, rel=1e-9)


def test_lag_search_is_bounded_on_long_series():
    """A daily rhythm of 30 prompts: unbounded, the AIC search (Schwert's rule allows 45 lags
    at T = 20,000) picks about 30 lags; bounded it searches 0..24, as statsmodels does when
    given maxlag=24."""
    rng = np.random.default_rng(7)
    n = 20_000
    x = rng.standard_normal(n)
    for t in range(30, n):
        x[t] += 0.6 * x[t - 30]
    assert adf_max_lag(n) == MAX_ADF_LAG == 24
    assert adf_max_lag(10 ** 6) == 24
    adf_test, _ = stationarity_tests(x)
    assert adf_test.lags <= MAX_ADF_LAG
    assert adf_test.p == pytest.approx(statsmodels_adf(x, MAX_ADF_LAG)[1], rel=1e-9, abs=1e-300)


def test_schwert_rule_below_the_cap():
    # Schwert (1989): ceil(12 (T/100)^(1/4)); 200 answers -> 15, 1,600 -> 24
    assert adf_max_lag(200) == 15
    assert adf_max_lag(1600) == 24


def test_same_series_is_tested_once():
    rng = np.random.default_rng(3)
    x = np.cumsum(rng.standard_normal(500))
    first = stationarity_tests(x)
    assert stationarity_tests(x.copy()) is first          # same values: remembered
    assert stationarity_tests(x + 1.0) is not first       # other values: tested anew
    segment = np.zeros(x.size, dtype=int)
    screen = screen_item("item", x, segment, np.ones(x.size), None)
    assert (screen.adf, screen.kpss) == first


def test_timestamp_weekdays_match_pandas():
    rng = np.random.default_rng(5)
    stamps = pd.Timestamp("2026-03-04 08:00") + pd.to_timedelta(
        np.sort(rng.uniform(0, 20 * 24 * 60, 120)), unit="min")
    frame = pd.DataFrame({"when": stamps.strftime("%Y-%m-%d %H:%M"),
                          "a": rng.normal(size=120), "b": rng.normal(size=120)})
    diary = diary_from_frame(frame, ["a", "b"], TimeSettings(mode="timestamp", time="when"))
    got = weekdays(diary)
    answered = ~np.isnat(np.asarray(diary.time, dtype="datetime64[ns]"))
    want = pd.DatetimeIndex(np.asarray(diary.time, dtype="datetime64[ns]")[answered]).day_of_week
    assert np.array_equal(got[answered], want)   # pandas' weekday, Monday = 0


def test_collinear_regression_is_reported_in_words():
    """One change at the very end: every lagged difference is zero on the regression's rows,
    so the regressors are collinear (statsmodels returns NaN here); the ADF is not run."""
    x = np.r_[np.zeros(199), 1.0]
    adf_test, _ = stationarity_tests(x)
    assert adf_test.p is None
    assert adf_test.verdict == "not run: the answers change too rarely for the ADF regression"
