"""The estimator registry: settings an estimator does not take are refused, in the engine and
on the command line; convergence is judged the same way for every estimator.

Data: simulated from the two-state model with known parameters (tests/two_state_model.py)
and the bundled demo (simulated, documented as invented in resources/demo).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import OptimizeResult
from two_state_model import SPEC, TRUE

import lagwise.models.optimise as optimise
from lagwise.desktop.cli import main
from lagwise.models.errors import SpecError
from lagwise.models.estimate import fit
from lagwise.models.estimators import ESTIMATORS, SETTINGS, FitOptions
from lagwise.models.simulate import simulate_diary

DEMO = Path(__file__).resolve().parents[1] / "resources" / "demo" / "demo_diary.csv"
VALUES = {"depth": 2, "night_gap": 6, "interval_unit": "minutes", "night": "carry",
          "prompt_spacing": 1.5}


@pytest.mark.parametrize("name", sorted(ESTIMATORS))
def test_each_estimator_refuses_the_settings_it_does_not_take(name):
    method = ESTIMATORS[name]
    for setting in SETTINGS.values():
        given = {setting.field: VALUES[setting.field]}
        if setting.field in method.settings:
            assert getattr(FitOptions(estimator=name, **given), setting.field) == VALUES[setting.field]
        else:
            with pytest.raises(SpecError, match=f"does not take {setting.words}"):
                FitOptions(estimator=name, **given)
    for missing in ("fiml", "listwise"):
        if missing in method.missing:
            assert FitOptions(estimator=name, missing=missing).missing == missing
        else:
            with pytest.raises(SpecError, match="handles missed prompts itself"):
                FitOptions(estimator=name, missing=missing)


@pytest.mark.parametrize("name", sorted(ESTIMATORS))
def test_switching_estimator_drops_what_the_new_one_does_not_take(name):
    everything = VALUES
    for source in ESTIMATORS.values():
        options = FitOptions(estimator=source.name, missing=source.missing[-1],
                             **{s: v for s, v in everything.items() if s in source.settings})
        switched = options.for_estimator(name)
        assert switched.estimator == name and switched.missing in ESTIMATORS[name].missing
        for field in SETTINGS:
            expected = getattr(options, field) if field in ESTIMATORS[name].settings else None
            assert getattr(switched, field) == expected


@pytest.mark.parametrize("args, words", [
    (["--estimator", "stationary", "--night-gap", "3"], "--night-gap needs --estimator exact"),
    (["--estimator", "first-copy-free", "--night-gap", "3"], "--night-gap needs --estimator exact"),
    (["--estimator", "exact", "--depth", "2"], "--depth needs --estimator stationary or first-copy-free"),
    (["--estimator", "exact", "--missing", "listwise"], "handles missed prompts itself"),
])
def test_command_line_refuses_settings_in_one_line(args, words, capsys):
    code = main(["fit", str(DEMO), "--day", "day", "--prompt", "prompt",
                 "--state", "tension=tense,restless,worried", *args])
    err = capsys.readouterr().err
    assert code == 2 and words in err and err.count("\n") == 1 and "Traceback" not in err


@pytest.fixture(scope="module")
def diary():
    return simulate_diary(SPEC, days=30, prompts_per_day=8, p_missed=0.1, seed=21, **TRUE)


def _stopping_at(monkeypatch, message: str, success: bool, shift: float) -> None:
    """Make the optimiser stop at its start point moved by `shift` (in scaled units) with
    `message`, as L-BFGS-B reports a failed line search or an iteration limit."""
    def fake(fun, x0, **kwargs):
        return OptimizeResult(x=np.asarray(x0) + shift, success=success, message=message, nit=3)
    monkeypatch.setattr(optimise, "minimize", fake)


@pytest.mark.parametrize("estimator", sorted(ESTIMATORS))
@pytest.mark.parametrize("message, success", [
    ("ABNORMAL_TERMINATION_IN_LNSRCH", False),      # a line search that failed far away
    ("CONVERGENCE: REL_REDUCTION_OF_F_<=_FACTR*EPSMCH", True),   # "success" but not there
])
def test_no_estimator_reports_converged_when_the_gradient_is_not_small(
        estimator, message, success, diary, monkeypatch):
    # Common practice: an optimum is where the gradient vanishes, whatever the optimiser says.
    _stopping_at(monkeypatch, message, success, shift=0.3)
    spacing = {"prompt_spacing": 1.0} if estimator == "continuous-time" else {}   # no times
    result = fit(diary, SPEC, FitOptions(estimator=estimator, **spacing), standard_errors=False)
    assert not result.converged and "gradient" in result.message


def test_exact_not_converged_when_the_optimiser_stops_at_its_iteration_limit(diary, monkeypatch):
    _stopping_at(monkeypatch, "STOP: TOTAL NO. OF ITERATIONS REACHED LIMIT", False, shift=0.0)
    result = fit(diary, SPEC, FitOptions(estimator="exact"))
    assert not result.converged and "iteration limit" in result.message
    assert "LIMIT" in result.optimiser_message


def test_a_line_search_stop_at_the_optimum_counts_as_converged(diary, monkeypatch):
    # L-BFGS-B often ends with a failed line search at an optimum it cannot improve in
    # floating point; the gradient check then decides.
    reference = fit(diary, SPEC, FitOptions(estimator="exact"))
    real = optimise.minimize

    def at_the_optimum(fun, x0, **kwargs):
        done = real(fun, x0, **kwargs)
        return OptimizeResult(x=done.x, success=False, message="ABNORMAL_TERMINATION_IN_LNSRCH",
                              nit=done.nit)
    monkeypatch.setattr(optimise, "minimize", at_the_optimum)
    result = fit(diary, SPEC, FitOptions(estimator="exact"))
    assert result.converged
    np.testing.assert_allclose(result.lagged[0], reference.lagged[0], atol=1e-6)
