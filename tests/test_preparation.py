"""Preparation steps: checks with statsmodels OLS, pandas group means and numpy moments."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from lagwise.models.diary import TimeSettings
from lagwise.models.errors import DataError, ProjectError
from lagwise.models.preparation import (
    STEP_NAMES,
    Step,
    apply_steps,
    describe,
    steps_from_json,
    steps_to_json,
    usual_order,
)
from lagwise.models.timegrid import diary_from_frame

GRID = TimeSettings(mode="grid", day="day", prompt="prompt")


def dated_diary(days=28, prompts=6, seed=0):
    """A dated grid diary with a trend, a prompt pattern and a weekday pattern planted in
    random draws, about 15% of prompts missed (simulated; never check values)."""
    rng = np.random.default_rng(seed)
    dates = pd.date_range("2025-03-03", periods=days, freq="D")
    rows = [(d, b) for d in dates for b in range(1, prompts + 1)]
    keep = rng.random(len(rows)) >= 0.15
    table = pd.DataFrame([r for r, k in zip(rows, keep) if k], columns=["date", "prompt"])
    position = np.arange(len(rows))[keep]
    weekday = table["date"].dt.day_of_week.to_numpy()
    table["calm"] = 3 + 0.01 * position + 0.4 * table["prompt"] + rng.normal(size=len(table))
    table["tense"] = 2 - 0.5 * (weekday >= 5) + rng.normal(size=len(table))
    table["day"] = table["date"].dt.strftime("%Y-%m-%d")
    diary = diary_from_frame(table.drop(columns="date"), ["calm", "tense"], GRID)
    return diary


def answered_frame(diary):
    """Long table of answered values with occasion index, prompt and weekday (pandas)."""
    frame = pd.DataFrame(diary.values, columns=list(diary.items))
    frame["index"] = np.arange(diary.n_occasions, dtype=float)
    frame["prompt"] = diary.prompt
    frame["weekday"] = pd.to_datetime(np.array(diary.day_labels)[diary.day]).day_of_week
    return frame


def ols_slope(values):
    """statsmodels OLS of the answered values on the occasion index with a constant."""
    ok = ~np.isnan(values)
    t = np.flatnonzero(ok).astype(float)
    return sm.OLS(values[ok], sm.add_constant(t)).fit().params


def test_detrend_leaves_zero_slope_and_keeps_gaps():
    diary = dated_diary()
    assert ols_slope(diary.values[:, 0])[1] > 0.005  # the planted trend is there before
    out = apply_steps(diary, (Step("detrend"),))
    for j in range(diary.n_items):
        intercept, slope = ols_slope(out.values[:, j])  # common practice: OLS residuals
        assert slope == pytest.approx(0.0, abs=1e-12)
        assert intercept == pytest.approx(0.0, abs=1e-9)
    np.testing.assert_array_equal(np.isnan(out.values), np.isnan(diary.values))
    assert not np.isnan(diary.values[~np.isnan(out.values)]).any()
    assert ols_slope(diary.values[:, 0])[1] > 0.005  # the input diary is untouched


def test_prompt_means_removed_leave_zero_mean_per_position():
    diary = dated_diary(seed=1)
    out = apply_steps(diary, (Step("prompt_means"),))
    means = answered_frame(out).groupby("prompt")[["calm", "tense"]].mean()  # pandas
    np.testing.assert_allclose(means.to_numpy(), 0.0, atol=1e-12)
    before = answered_frame(diary).groupby("prompt")["calm"].mean()
    assert before.max() - before.min() > 1.0  # the planted prompt pattern was there


def test_weekday_means_removed_leave_zero_mean_per_weekday():
    diary = dated_diary(seed=2)
    out = apply_steps(diary, (Step("weekday_means"),))
    means = answered_frame(out).groupby("weekday")[["calm", "tense"]].mean()  # pandas
    assert len(means) == 7
    np.testing.assert_allclose(means.to_numpy(), 0.0, atol=1e-12)


def test_standardize_gives_mean_zero_sd_one():
    diary = dated_diary(seed=3)
    out = apply_steps(diary, (Step("standardize"),))
    frame = answered_frame(out)[["calm", "tense"]]
    np.testing.assert_allclose(frame.mean().to_numpy(), 0.0, atol=1e-12)  # pandas, skips NaN
    np.testing.assert_allclose(frame.std(ddof=1).to_numpy(), 1.0, rtol=1e-12)


def test_order_of_steps_matters():
    diary = dated_diary(seed=4)
    scale_last = apply_steps(diary, usual_order((Step("standardize"), Step("detrend"))))
    scale_first = apply_steps(diary, (Step("standardize"), Step("detrend")))
    assert [s.name for s in usual_order((Step("standardize"), Step("detrend")))] == [
        "detrend", "standardize"]
    sd_last = np.nanstd(scale_last.values[:, 0], ddof=1)
    sd_first = np.nanstd(scale_first.values[:, 0], ddof=1)
    assert sd_last == pytest.approx(1.0)
    assert sd_first < 0.95  # the trend removed after scaling took variance away
    assert ols_slope(scale_last.values[:, 0])[1] == pytest.approx(0.0, abs=1e-12)


def test_steps_limited_to_items():
    diary = dated_diary(seed=5)
    out = apply_steps(diary, (Step("standardize", ("tense",)),))
    np.testing.assert_array_equal(out.values[:, 0], diary.values[:, 0])
    assert np.nanstd(out.values[:, 1], ddof=1) == pytest.approx(1.0)


def test_steps_json_round_trip():
    steps = (Step("detrend", ("calm",)), Step("prompt_means"), Step("weekday_means"),
             Step("standardize"))
    text = json.dumps(steps_to_json(steps))
    assert steps_from_json(json.loads(text)) == steps
    assert steps_from_json(None) == ()
    assert steps_from_json(["standardize"]) == (Step("standardize"),)
    assert tuple(STEP_NAMES) == tuple(s.name for s in steps)
    assert "then" in describe(steps)


@pytest.mark.parametrize("bad", [{"steps": []}, [{"name": "smooth"}],
                                 [{"name": "detrend", "items": "calm"}], [3]])
def test_bad_steps_json_is_refused(bad):
    with pytest.raises(ProjectError):
        steps_from_json(bad)


def test_impossible_steps_raise_data_errors():
    diary = dated_diary(seed=6)
    with pytest.raises(DataError, match="not an item"):
        apply_steps(diary, (Step("detrend", ("sleepy",)),))
    frame = pd.DataFrame({"calm": [1.0, 2.0, 3.0, 4.0], "tense": [2.0, 2.0, 2.0, 2.0]})
    plain = diary_from_frame(frame, ["calm", "tense"], TimeSettings(mode="order"))
    with pytest.raises(DataError, match="not dates"):
        apply_steps(plain, (Step("weekday_means"),))
    with pytest.raises(DataError, match="no prompt numbers"):
        apply_steps(plain, (Step("prompt_means"),))
    with pytest.raises(DataError, match="'tense' cannot be standardized"):
        apply_steps(plain, (Step("standardize"),))
