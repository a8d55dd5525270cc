"""The Data page's Screening tab inside a real session: it screens the session's diary with
the session's preparation steps and the current model's free parameters, ticking a step is
an undoable edit of the session, and the screening is not recomputed when nothing changed.

The diary is the bundled demo (resources/demo, invented and documented there as such).
"""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtCore import Qt

import lagwise.desktop.pages.screening_view as screening_module
from lagwise.desktop.export import save_widget_png
from lagwise.desktop.pages.data_page import DataPage
from lagwise.models.preparation import Step
from lagwise.models.numbers import fmt
from lagwise.models.screening import screen_diary


@pytest.fixture
def page(session, qtbot):
    widget = DataPage(session)
    qtbot.addWidget(widget)
    widget.resize(1400, 950)
    widget.show()
    qtbot.waitExposed(widget)
    return widget


@pytest.fixture
def screenings(monkeypatch):
    """Count the screenings the view computes (each one takes a few tenths of a second)."""
    calls = []
    original = screening_module.screen_diary

    def counted(*args, **kwargs):
        calls.append(args[0])
        return original(*args, **kwargs)

    monkeypatch.setattr(screening_module, "screen_diary", counted)
    return calls


def free_parameters(spec) -> int:
    """Free parameters of a marker-scaled model with free innovation covariances, counted
    the usual SEM way (common practice): loadings less one marker per state, one intercept
    and one unique variance per item, every free lagged path, k(k+1)/2 innovations."""
    items = len(spec.items)
    lagged = sum(int(spec.path_mask(lag).sum()) for lag in range(1, spec.lags + 1))
    k = spec.k
    return (items - k) + items + items + lagged + k * (k + 1) // 2


def column(model, header):
    return [model.headerData(c, Qt.Orientation.Horizontal) for c in range(model.columnCount())].index(header)


def show_screening(page, qtbot):
    page.tabs.setCurrentWidget(page.screening_scroll)
    idle(page, qtbot)


def idle(page, qtbot):
    """Wait until the screening (in the worker) and its plots are shown."""
    qtbot.waitUntil(lambda: not page.screening.busy, timeout=60_000)


def test_screening_tab_shows_the_sessions_diary(page, session, qtbot, artifacts):
    show_screening(page, qtbot)
    diary, spec = session.diary, session.spec
    assert spec.identification == "marker" and spec.innovations == "free"
    n_free = free_parameters(spec)
    assert page.n_free() == n_free
    expected = screen_diary(diary, n_free=n_free)
    model = page.screening.item_model
    assert [model.index(r, 0).data() for r in range(model.rowCount())] == list(diary.items)
    mean, sd, acf, adf = (column(model, h) for h in ("Mean", "SD", "ACF 1", "ADF p"))
    for r, item in enumerate(expected.items):
        answers = diary.values[:, r][~np.isnan(diary.values[:, r])]
        # the mean and SD shown are the answers' mean and SD (numpy, divisor n - 1)
        assert float(model.index(r, mean).data()) == pytest.approx(answers.mean(), abs=0.005)
        assert float(model.index(r, sd).data()) == pytest.approx(answers.std(ddof=1), abs=0.005)
        assert model.index(r, acf).data() == f"{item.acf[0]:.2f}"
        assert model.index(r, adf).data() == fmt(item.adf.p, "p")
    text = page.screening.readiness_label.text()
    readiness = expected.readiness
    assert f"<b>{readiness.answered}</b> of {diary.n_occasions} prompts" in text
    assert f"({n_free} free parameters in the current model)" in text
    assert f"<b>{readiness.windows_per_parameter:.1f}</b> complete windows per free" in text
    assert save_widget_png(page, artifacts / "data-page-screening.png", 1.0).stat().st_size > 20_000


def test_ticking_a_step_is_an_undoable_edit_of_the_session(page, session, qtbot, artifacts):
    show_screening(page, qtbot)
    assert session.preparation == ()
    page.screening.checks["detrend"].setChecked(True)
    assert session.preparation == (Step("detrend"),)
    page.screening.checks["standardize"].setChecked(True)
    assert session.preparation == (Step("detrend"), Step("standardize"))
    idle(page, qtbot)
    assert session.undo_stack.undoText() == "Preparation steps"
    assert "Before estimation: Remove a linear trend per item; then Standardize" \
        in page.summary_label.text()
    after = page.screening.screening(prepared=True)
    assert all(s.sd == pytest.approx(1.0) for s in after.items)  # standardized: SD 1
    save_widget_png(page, artifacts / "data-page-screening-prepared.png", 1.0)
    session.undo_stack.undo()
    assert session.preparation == (Step("detrend"),)
    assert not page.screening.checks["standardize"].isChecked()
    assert page.screening.checks["detrend"].isChecked()
    session.undo_stack.undo()
    assert session.preparation == ()
    assert not page.screening.checks["detrend"].isChecked()
    assert page.screening.screening(prepared=True) is None
    assert "Before estimation" not in page.summary_label.text()
    session.undo_stack.redo()
    assert session.preparation == (Step("detrend"),)
    assert page.screening.checks["detrend"].isChecked()


def test_steps_set_elsewhere_show_on_the_tab(page, session, qtbot):
    show_screening(page, qtbot)
    session.set_preparation((Step("prompt_means"),), "Preparation steps")
    assert page.screening.checks["prompt_means"].isChecked()
    assert page.screening.steps() == (Step("prompt_means"),)


def test_screening_runs_only_when_shown_and_changed(page, session, qtbot, screenings):
    show_screening(page, qtbot)
    assert screenings == [session.diary]
    page.tabs.setCurrentIndex(0)
    show_screening(page, qtbot)
    page.refresh()                                   # nothing changed: nothing recomputed
    assert len(screenings) == 1
    page.tabs.setCurrentIndex(0)                     # a model edit while the tab is hidden ...
    spec = session.spec
    session.edit_spec(spec.with_paths(1, np.ones((spec.k, spec.k), bool)), "All paths")
    assert len(screenings) == 1
    show_screening(page, qtbot)                      # ... is screened when the tab is shown
    assert len(screenings) == 2
    n_free = free_parameters(session.spec)
    assert f"({n_free} free parameters in the current model)" in page.screening.readiness_label.text()
    page.screening.checks["detrend"].setChecked(True)  # the view screens the prepared diary once
    idle(page, qtbot)
    assert len(screenings) == 3 and session.preparation == (Step("detrend"),)


def test_no_model_means_no_parameter_count(session, lagwise_app, qtbot):
    from lagwise.desktop.session import EMPTY_SPEC

    session.edit_spec(EMPTY_SPEC, "No states")
    page = DataPage(session)
    qtbot.addWidget(page)
    page.show()
    show_screening(page, qtbot)
    assert page.n_free() is None
    assert "specify a model to see this" in page.screening.readiness_label.text()
