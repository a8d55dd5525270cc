"""Screening checks against statsmodels, scipy, pandas, a hand count and simulations."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.tools.sm_exceptions import InterpolationWarning
from statsmodels.tsa.stattools import acf, adfuller, kpss

from lagwise.models.diary import TimeSettings
from lagwise.models.screening import (
    compliance_by_week,
    format_screening,
    is_strong_trend,
    linear_trend,
    screen_diary,
    screening_json,
    stationarity_tests,
    weekdays,
    within_segment_acf,
)
from lagwise.models.timegrid import diary_from_frame
from lagwise.models.windows import lag_windows

ORDER = TimeSettings(mode="order")
GRID = TimeSettings(mode="grid", day="day", prompt="prompt")


def ar1(n: int, phi: float, rng: np.random.Generator) -> np.ndarray:
    """A stationary AR(1) series x_t = phi x_{t-1} + e_t, e_t ~ N(0, 1)."""
    x = np.empty(n)
    x[0] = rng.normal(scale=1 / np.sqrt(1 - phi ** 2))
    for t in range(1, n):
        x[t] = phi * x[t - 1] + rng.normal()
    return x


def order_diary(**columns):
    """A one-segment diary in file order from named columns."""
    return diary_from_frame(pd.DataFrame(columns), list(columns), ORDER)


def adf_p(x):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        return adfuller(x, regression="c", autolag="AIC")[1]


def kpss_p(x):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", (FutureWarning, InterpolationWarning))
        return kpss(x, regression="c", nlags="auto")[1]


# ----------------------------------------------------------------------------- statsmodels

def test_single_complete_segment_matches_statsmodels():
    rng = np.random.default_rng(11)
    x = 5 + ar1(240, 0.6, rng) + 0.004 * np.arange(240)
    y = rng.normal(size=240)
    diary = order_diary(calm=x, tense=y)
    out = screening_json(screen_diary(diary))
    for name, values in (("calm", x), ("tense", y)):
        got = out[name]
        # statsmodels.tsa.stattools.acf, the usual biased estimator, direct sum (fft=False)
        np.testing.assert_allclose(got["acf"], acf(values, nlags=5, fft=False)[1:], rtol=1e-12)
        # statsmodels adfuller with a constant and the lag length chosen by AIC
        assert got["adf_p"] == pytest.approx(adf_p(values), rel=1e-12)
        # statsmodels kpss, level stationarity, automatic lag length
        assert got["kpss_p"] == pytest.approx(kpss_p(values), rel=1e-12)
        # statsmodels OLS of the answers on the occasion index 0..n-1 with a constant
        t = np.arange(values.size, dtype=float)
        ols = sm.OLS(values, sm.add_constant(t)).fit()
        assert got["trend"]["slope"] == pytest.approx(ols.params[1], rel=1e-10)
        assert got["trend"]["p"] == pytest.approx(ols.pvalues[1], rel=1e-8)
        # the same slope and p from scipy's simple linear regression
        line = stats.linregress(t, values)
        assert got["trend"]["slope"] == pytest.approx(line.slope, rel=1e-10)
        assert got["trend"]["p"] == pytest.approx(line.pvalue, rel=1e-8)
    json.dumps(out, allow_nan=False)  # the inspect --json output must be valid JSON


def test_tests_close_up_gaps():
    """ADF/KPSS run on the answered values in time order (documented: gaps closed up)."""
    rng = np.random.default_rng(5)
    x = ar1(200, 0.4, rng)
    x[rng.choice(200, size=30, replace=False)] = np.nan
    diary = order_diary(calm=x, tense=rng.normal(size=200))
    got = screening_json(screen_diary(diary))["calm"]
    answered = x[~np.isnan(x)]
    assert got["adf_p"] == pytest.approx(adf_p(answered), rel=1e-12)   # statsmodels adfuller
    assert got["kpss_p"] == pytest.approx(kpss_p(answered), rel=1e-12)  # statsmodels kpss


def test_kpss_table_edge_is_reported_and_warning_caught():
    rng = np.random.default_rng(3)
    x = rng.normal(size=300)  # white noise: the KPSS statistic is small, p at the table's top
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        warnings.simplefilter("ignore", FutureWarning)
        kpss(x, regression="c", nlags="auto")
    statsmodels_warned = any(issubclass(w.category, InterpolationWarning) for w in caught)
    assert statsmodels_warned  # statsmodels tabulates KPSS p only between 0.01 and 0.10
    with warnings.catch_warnings():
        warnings.simplefilter("error", InterpolationWarning)  # must not leak to the caller
        _, kpss_test = stationarity_tests(x)
    assert kpss_test.p_bounded and kpss_test.p == pytest.approx(0.1)
    assert "edge of the test's table" in kpss_test.verdict and "larger" in kpss_test.verdict


def test_skew_sd_and_floor_ceiling():
    rng = np.random.default_rng(8)
    x = np.minimum(rng.poisson(1.2, size=150).astype(float) + 1, 7)
    diary = order_diary(calm=x, tense=rng.normal(size=150))
    item = screen_diary(diary, scales={"calm": (1, 7)}).item("calm")
    # scipy.stats.skew with bias=False is the adjusted Fisher-Pearson coefficient G1
    assert item.skewness == pytest.approx(stats.skew(x, bias=False), rel=1e-12)
    assert item.sd == pytest.approx(np.std(x, ddof=1), rel=1e-12)  # numpy, divisor n - 1
    # floor and ceiling shares: answers equal to the scale ends, counted with numpy
    assert item.floor_share == pytest.approx(np.mean(x == 1))
    assert item.ceiling_share == pytest.approx(np.mean(x == 7))
    observed = screen_diary(diary).item("tense")  # default scale: observed min and max
    assert observed.floor_share == pytest.approx(1 / 150)
    assert observed.ceiling_share == pytest.approx(1 / 150)


# ----------------------------------------------------------------------------- within segments

def test_acf_within_segments_by_hand():
    # Two segments: [2, 1, 3] and [4, missed, 0, 2]. Answered n = 6, mean m = 12/6 = 2,
    # deviations 0, -1, 1 | 2, -, -2, 0, S0 = 0+1+1+4+4+0 = 10.
    # lag 1, pairs (x_t, x_t-1) inside one segment with both answered, deviation products:
    #   1|2: (-1)(0) = 0, 3|1: (1)(-1) = -1, 2|0: (0)(-2) = 0 -> n1 = 3, S1 = -1
    #   (4|3 spans the segment break and 0|missed, missed|4 lack an answer: left out).
    #   r1 = (S1/n1)/(S0/n) * (n-1)/n = (-1/3)/(10/6)*(5/6) = -1/6.
    # lag 2: 3|2: (1)(0) = 0; 0|4: (-2)(2) = -4 -> n2 = 2, S2 = -4,
    #   r2 = (-4/2)/(10/6)*(4/6) = -0.8.
    # lag 3: only 2|4: (0)(2) = 0 -> n3 = 1, r3 = 0. Lags 4, 5: no pair -> None.
    column = np.array([2, 1, 3, 4, np.nan, 0, 2], dtype=float)
    segment = np.array([0, 0, 0, 1, 1, 1, 1])
    r, pairs = within_segment_acf(column, segment, 5)
    assert pairs == (3, 2, 1, 0, 0)
    assert r[0] == pytest.approx(-1 / 6)
    assert r[1] == pytest.approx(-0.8)
    assert r[2] == pytest.approx(0.0)
    assert r[3] is None and r[4] is None


def test_acf_within_days_recovers_planted_inertia():
    """Simulation with known truth: AR(1) with phi = 0.5 restarting every day of 6 prompts,
    20% of prompts missed; the within-segment lag-1 ACF estimates phi."""
    rng = np.random.default_rng(21)
    days, prompts, phi = 500, 6, 0.5
    x = np.concatenate([ar1(prompts, phi, rng) for _ in range(days)])
    x[rng.random(x.size) < 0.2] = np.nan
    segment = np.repeat(np.arange(days), prompts)
    r, _ = within_segment_acf(x, segment, 2)
    assert r[0] == pytest.approx(phi, abs=0.05)
    assert r[1] == pytest.approx(phi ** 2, abs=0.05)


# ----------------------------------------------------------------------------- simulations

def test_planted_trend_is_flagged_and_white_noise_is_not():
    rng = np.random.default_rng(2024)
    n = 300
    trending = 0.01 * np.arange(n) + rng.normal(size=n)  # drift of 3 SD of the noise
    noise = rng.normal(size=n)
    screening = screen_diary(order_diary(trending=trending, noise=noise))
    assert is_strong_trend(screening.item("trending").trend)
    assert not is_strong_trend(screening.item("noise").trend)
    assert screening.item("noise").reading == "looks stationary"
    warned = " ".join(screening.readiness.warnings)
    assert "'trending' rises" in warned and "'noise'" not in warned


def test_random_walk_reads_non_stationary():
    rng = np.random.default_rng(7)
    walk = np.cumsum(rng.normal(size=300))  # unit root: ADF should not reject, KPSS should
    screening = screen_diary(order_diary(walk=walk, noise=rng.normal(size=300)))
    item = screening.item("walk")
    assert item.adf.rejects is False and item.kpss.rejects is True
    assert item.reading == "looks non-stationary"


# ----------------------------------------------------------------------------- profiles, weeks

def dated_grid(days=21, prompts=5, seed=0, drop=0.2):
    """A grid diary with date labels; answers are random draws (never check values)."""
    rng = np.random.default_rng(seed)
    dates = pd.date_range("2025-01-06", periods=days, freq="D")  # starts on a Monday
    rows = [(d.strftime("%Y-%m-%d"), b) for d in dates for b in range(1, prompts + 1)]
    keep = rng.random(len(rows)) >= drop
    table = pd.DataFrame([r for r, k in zip(rows, keep) if k], columns=["day", "prompt"])
    table["calm"] = rng.integers(1, 8, size=len(table)).astype(float)
    table["tense"] = rng.normal(size=len(table))
    return table, diary_from_frame(table, ["calm", "tense"], GRID)


def test_profiles_match_pandas_groupby():
    table, diary = dated_grid()
    item = screen_diary(diary).item("calm")
    by_prompt = table.groupby("prompt")["calm"].mean()  # pandas: mean per prompt number
    assert item.within_day.labels == tuple(str(p) for p in by_prompt.index)
    np.testing.assert_allclose(item.within_day.means, by_prompt.to_numpy())
    # pandas: weekday of the date (Monday = 0)
    by_weekday = table.groupby(pd.to_datetime(table["day"]).dt.day_of_week)["calm"].mean()
    np.testing.assert_allclose([item.weekday.means[k] for k in by_weekday.index],
                               by_weekday.to_numpy())
    assert item.weekday.labels[0] == "Mon"


def test_no_weekday_profile_without_dates():
    rng = np.random.default_rng(1)
    diary = order_diary(calm=rng.normal(size=60), tense=rng.normal(size=60))
    assert weekdays(diary) is None
    item = screen_diary(diary).item("calm")
    assert item.weekday is None and item.within_day is None  # no prompt numbers either


def test_compliance_by_week_matches_pandas():
    table, diary = dated_grid(days=17, seed=4)
    weeks = compliance_by_week(diary)
    week = (pd.to_datetime(table["day"]) - pd.Timestamp("2025-01-06")).dt.days // 7
    answered = table.groupby(week).size()  # pandas: answered rows per 7-day block
    assert [w.answered for w in weeks] == answered.tolist()
    assert [w.scheduled for w in weeks] == [35, 35, 15]  # 7, 7 and 3 days of 5 prompts
    assert weeks[2].first_day == "2025-01-20" and weeks[2].last_day == "2025-01-22"


# ----------------------------------------------------------------------------- readiness

def test_readiness_counts_and_warnings():
    _, diary = dated_grid(days=4, prompts=5, seed=2)
    screening = screen_diary(diary, n_free=20)
    ready = screening.readiness
    windows = lag_windows(diary, 1)
    assert ready.complete_windows == windows.n_complete
    assert ready.windows_per_parameter == pytest.approx(windows.n_complete / 20)
    assert ready.answered == int(diary.answered.sum())
    text = " ".join(ready.warnings)
    assert "complete lag windows" in text and "per free parameter" in text
    assert "rules of thumb" in ready.caution
    json.dumps(screening.to_json(), allow_nan=False)
    assert "warnings" in format_screening(screening)


def test_near_zero_variance_is_flagged():
    rng = np.random.default_rng(9)
    flat = np.full(120, 4.0)
    flat[[10, 70]] = 5.0
    screening = screen_diary(order_diary(flat=flat, lively=rng.normal(size=120)),
                             scales={"flat": (1, 7)})
    text = " ".join(screening.readiness.warnings)
    assert "'flat' barely varies" in text and "'lively' barely" not in text


def test_linear_trend_uses_occasion_index_with_gaps():
    """Missed prompts keep their place on the occasion axis (statsmodels OLS on the index)."""
    column = np.array([1.0, np.nan, np.nan, 2.5, 3.0, np.nan, 4.2])
    index = np.array([0, 3, 4, 6], dtype=float)
    ols = sm.OLS(column[~np.isnan(column)], sm.add_constant(index)).fit()
    trend = linear_trend(column)
    assert trend.slope == pytest.approx(ols.params[1])
    assert trend.p == pytest.approx(ols.pvalues[1])


# ----------------------------------------------------------------------------- scales, profiles

def test_floor_and_ceiling_at_the_guessed_scale_ends():
    from lagwise.models.scales import item_scales

    rng = np.random.default_rng(12)
    calm = np.minimum(2 + rng.poisson(0.4, 200), 7).astype(float)  # 1-7 answered 2..7
    calm[0] = 7.0
    diary = order_diary(calm=calm, tense=rng.normal(size=200))
    scales = item_scales(diary.items, diary.values)
    assert scales["calm"] == (1.0, 7.0)  # the usual 1-7 scale (common practice)
    item = screen_diary(diary, scales).item("calm")
    assert item.floor_share == 0.0 and item.ceiling_share == pytest.approx(np.mean(calm == 7))
    assert "floor effect" not in item.flags
    # at the lowest answer given (2) the same answers would count as a floor effect
    assert screen_diary(diary).item("calm").floor_share == pytest.approx(np.mean(calm == 2))
    assert screening_json(screen_diary(diary, scales))["calm"]["scale"] == [1.0, 7.0]


def test_profile_means_within_rounding_of_zero_are_zero():
    from lagwise.models.preparation import Step, apply_steps
    from lagwise.models.recipe import load_diary
    from lagwise.resources import demo_diary_path

    demo = load_diary(demo_diary_path(), time=GRID)
    centred = apply_steps(demo, (Step("prompt_means"),))
    for item in screen_diary(centred).items:
        # the mean of deviations from each prompt's mean is exactly 0 (identity)
        assert item.within_day.means == (0.0,) * len(item.within_day.means)
    # real differences are kept at any scale: the same diary times 1e-12
    tiny = demo.__class__(**{**demo.__dict__, "values": demo.values * 1e-12})
    for small, full in zip(screen_diary(tiny).items, screen_diary(demo).items):
        np.testing.assert_allclose(small.within_day.means, np.array(full.within_day.means) * 1e-12,
                                   rtol=1e-9)


def test_kpss_edge_sentence_says_which_side():
    rng = np.random.default_rng(3)
    # statsmodels tabulates the KPSS p only between 0.01 and 0.10 (InterpolationWarning)
    _, white = stationarity_tests(rng.normal(size=300))
    assert white.p_bounded and white.edge_sentence.endswith("the true p is larger than 0.10.")
    walk_series = np.cumsum(rng.normal(size=300))
    adf_walk, walk = stationarity_tests(walk_series)
    assert walk.p_bounded and walk.p == pytest.approx(kpss_p(walk_series)) == 0.01
    assert walk.edge_sentence.endswith("the true p is smaller than 0.01.")
    assert walk.edge_sentence in walk.verdict
    assert adf_walk.edge_sentence is None  # the ADF p is never bounded
