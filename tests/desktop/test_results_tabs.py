"""The results tabs added beside the estimate's own: "State scores" and "Lag-2 check".

State scores are drawn from a real exact-estimator fit of the bundled demo diary (its own
specification): every curve must carry the engine's numbers (FitResult.extras
["state_scores"]) unchanged, the band must be the usual 95% normal interval, and the days
and missed prompts must be those of the diary. The lag-2 tab must show a real
models.lag2check.lag2_check result passed to it. Pictures go to test-artifacts/.
"""

from __future__ import annotations

import csv
from functools import cache
from html import escape
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtGui import QImage
from scipy.stats import norm

from lagwise.desktop.results import ResultsView
from lagwise.desktop.results.lag2_view import Lag2View
from lagwise.models.numbers import fmt
from lagwise.desktop.results.widgets import save
from lagwise.models.estimate import fit
from lagwise.models.lag2check import lag2_check
from lagwise.models.estimators import FitOptions
from lagwise.models.spec import make_spec
from results_fixture import demo_diary, demo_result, demo_spec

ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"
TWO_STATES = make_spec({"tension": ["tense", "restless", "worried"],
                        "low mood": ["sad", "flat", "hopeless"]})
Z95 = norm.ppf(0.975)  # two-sided 95% normal quantile, from scipy


@cache
def exact_result():
    return fit(demo_diary(), demo_spec(), FitOptions(estimator="exact"))


@pytest.fixture
def view(lagwise_app, qtbot):
    widget = ResultsView()
    qtbot.addWidget(widget)
    widget.resize(1280, 860)
    widget.show()
    return widget


def shown_scores(view: ResultsView):
    view.set_diary(demo_diary())
    view.show_result(exact_result())
    view.tabs.setCurrentWidget(view.state_scores)
    return view.state_scores


def missed_prompts(diary, items) -> np.ndarray:
    """Occasions where none of the model's items was answered (read off the diary)."""
    columns = [diary.items.index(i) for i in items]
    return np.isnan(diary.values[:, columns]).all(axis=1)


# ----- the tabs ----------------------------------------------------------------------------
def test_the_new_tabs_sit_beside_the_estimate(view):
    names = [view.tabs.tabText(i) for i in range(view.tabs.count())]
    assert names == ["Measurement", "Dynamics", "Responses", "Innovations", "Fit", "Parameters",
                     "State scores", "Lag-2 check", "Stability", "Runs", "Compare"]
    assert isinstance(view.lag2, Lag2View)
    assert view.tabs.widget(names.index("Lag-2 check")) is view.lag2
    assert view.tabs.widget(names.index("State scores")) is view.state_scores


def test_lag2_tab_shows_a_check_and_follows_the_shown_result(view, qtbot):
    check = lag2_check(demo_diary(), TWO_STATES)
    view.show_result(fit(demo_diary(), TWO_STATES))
    assert view.lag2.run_button.isEnabled()
    view.lag2.show_check(check)
    view.tabs.setCurrentWidget(view.lag2)
    qtbot.wait(20)
    assert view.lag2.check is check
    assert view.lag2.verdict.text() == escape(check.verdict)
    assert f"chi-square {fmt(check.lr_chi2)} on {check.lr_df} df" in view.lag2.lr_line.text()
    table = view.lag2.proxy
    assert table.rowCount() == len(check.paths)
    scores = sorted((table.index(r, 3).data() for r in range(table.rowCount())), key=float)
    assert scores == sorted((fmt(t.score) for t in check.paths), key=float)
    ARTIFACTS.mkdir(exist_ok=True)
    assert view.grab().save(str(ARTIFACTS / "results-lag-2-check-tab.png"))
    # show_result reaches the lag-2 tab: a result of another lag-1 model makes the check stale
    view.show_result(exact_result())
    assert view.lag2.check is None
    assert "changed since the last lag-2 check" in view.lag2.verdict.text()


# ----- state scores ------------------------------------------------------------------------
def test_each_state_curve_is_the_engines_smoothed_score(view):
    panel = shown_scores(view)
    result = exact_result()
    scores = result.extras["state_scores"]
    smoothed, sd = np.array(scores["smoothed"]), np.array(scores["smoothed_sd"])
    assert panel.has_scores
    assert list(panel.curves) == list(result.spec.state_names)
    for j, state in enumerate(result.spec.state_names):
        x, y = panel.curves[state].getData()
        np.testing.assert_array_equal(x, np.arange(demo_diary().n_occasions))
        np.testing.assert_array_equal(y, smoothed[:, j])
        # the band of the first day: smoothed +- z(0.975) SD, upper edge forwards, lower back
        path = panel.bands[state].path()
        first_day = int(np.sum(demo_diary().segment == demo_diary().segment[0]))
        upper = np.array([(path.elementAt(i).x, path.elementAt(i).y) for i in range(first_day)])
        np.testing.assert_allclose(upper[:, 0], np.arange(first_day))
        np.testing.assert_allclose(upper[:, 1], smoothed[:first_day, j] + Z95 * sd[:first_day, j],
                                   rtol=0, atol=1e-4 * sd[:first_day, j].max())
        lower_start = path.elementAt(first_day)
        assert lower_start.x == first_day - 1
        assert lower_start.y == pytest.approx(smoothed[first_day - 1, j] - Z95 * sd[first_day - 1, j],
                                              abs=1e-4 * sd[first_day - 1, j])


def test_days_segments_and_missed_prompts_come_from_the_diary(view):
    panel = shown_scores(view)
    diary, spec = demo_diary(), demo_spec()
    missed = missed_prompts(diary, spec.items)
    assert missed.any()
    same_day = np.append(diary.segment[1:] == diary.segment[:-1], False)
    for state, curve in panel.curves.items():
        connect = np.asarray(curve.opts["connect"])
        # solid only between two answered prompts of one segment (a day here)
        both = np.append(~missed[1:] & ~missed[:-1], False)
        np.testing.assert_array_equal(connect, same_day & both)
    plot = panel.plots.getItem(0, 0)
    ticks = [item for item in plot.items if getattr(item, "opts", {}).get("symbol") == "t1"]
    assert len(ticks) == 1 and len(ticks[0].data) == missed.sum()
    assert f"{diary.n_occasions} prompts, {int((~missed).sum())} with at least one answer" \
        in panel.note.text()
    assert "restart" in panel.note.text()
    labels = [label for _, label in plot.getAxis("bottom")._tickLevels[0]]
    assert labels[0] == diary.day_labels[0][5:]  # '2026-03-02' shown as '03-02'


def test_filtered_scores_and_the_export(view, tmp_path):
    panel = shown_scores(view)
    result = exact_result()
    filtered = np.array(result.extras["state_scores"]["filtered"])
    assert not any(c.isVisible() for c in panel.filtered_curves.values())
    panel.filtered_box.setChecked(True)
    for j, state in enumerate(result.spec.state_names):
        trace = panel.filtered_curves[state]
        assert trace.isVisible()
        np.testing.assert_array_equal(trace.getData()[1], filtered[:, j])
    assert "score using earlier prompts only" in panel.legend.text()
    ARTIFACTS.mkdir(exist_ok=True)
    assert view.grab().save(str(ARTIFACTS / "results-state-scores-filtered.png"))
    panel.filtered_box.setChecked(False)
    assert view.grab().save(str(ARTIFACTS / "results-state-scores.png"))

    (label, picture), = panel.pictures().items()
    png = save(picture, tmp_path / "scores.png")
    image = QImage(str(png))
    assert image.width() > 1000 and image.height() > 3 * 150
    svg = save(picture, tmp_path / "scores.svg").read_text(encoding="utf-8")
    assert "<svg" in svg and len(svg) > 10_000
    (label, model), = panel.tables().items()
    path = save(model, tmp_path / "scores.csv")
    with path.open(encoding="utf-8", newline="") as handle:
        rows = list(csv.DictReader(handle))
    diary = demo_diary()
    assert len(rows) == diary.n_occasions
    smoothed = np.array(result.extras["state_scores"]["smoothed"])
    sd = np.array(result.extras["state_scores"]["smoothed_sd"])
    missed = missed_prompts(diary, result.spec.items)
    for t in (0, 17, diary.n_occasions - 1):
        row = rows[t]
        assert row["Prompt"] == str(t + 1) and row["Day"] == diary.day_labels[diary.day[t]]
        assert row["Prompt of the day"] == str(int(diary.prompt[t]))
        assert row["Answered"] == ("no" if missed[t] else "yes")
        for j, state in enumerate(result.spec.state_names):
            assert row[f"{state} using the whole diary (smoothed)"] == fmt(smoothed[t, j])
            assert row[f"{state} using the whole diary (smoothed) SD"] == fmt(sd[t, j])
            assert float(row[f"{state} upper 95%"]) == pytest.approx(
                smoothed[t, j] + Z95 * sd[t, j], abs=5e-4 + 1e-4 * sd[t, j])
            assert row[f"{state} using earlier prompts only (filtered)"] == fmt(filtered[t, j])


def test_window_estimators_get_a_plain_message(view):
    view.show_result(demo_result())                       # stationary windows: no scores
    panel = view.state_scores
    assert not panel.has_scores and panel.stack.currentWidget() is panel.message
    assert "State scores come from the exact estimator: choose it on the Dynamics page" \
        in panel.message.text()
    assert panel.pictures() == {} and panel.tables() == {}
    assert not panel.filtered_box.isEnabled()
    view.tabs.setCurrentWidget(panel)
    ARTIFACTS.mkdir(exist_ok=True)
    assert view.grab().save(str(ARTIFACTS / "results-state-scores-message.png"))
    shown_scores(view)
    assert panel.has_scores
    view.show_result(demo_result())
    assert not panel.has_scores and panel.curves == {}


def test_a_diary_that_does_not_match_is_said_so(view):
    panel = shown_scores(view)
    view.set_diary(None)                                   # e.g. the data were replaced
    assert panel.has_scores and "diary has changed since this estimate" in panel.note.text()
    smoothed = np.array(exact_result().extras["state_scores"]["smoothed"])
    np.testing.assert_array_equal(panel.curves[demo_spec().state_names[0]].getData()[1],
                                  smoothed[:, 0])
    view.set_diary(demo_diary())
    assert "diary has changed" not in panel.note.text()
