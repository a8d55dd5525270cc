"""models.advice gathers every warning about a fit, and the report carries the cautions.

Real fits of the bundled demo diary (resources/demo, simulated and documented there as
invented); what each check expects follows from counts of that diary or from the fit's own
state, never from invented values.
"""

from __future__ import annotations

import json
from dataclasses import replace
from functools import cache

import numpy as np
import pytest

from lagwise.models.advice import AdviceCode, caution_line, data_readiness, fit_warnings
from lagwise.models.diary import TimeSettings
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.flags import FlagCode
from lagwise.models.lag2check import lag2_check
from lagwise.models.objective import MIN_WINDOWS_PER_PARAMETER
from lagwise.models.readers import read_table
from lagwise.models.recipe import DiaryRecipe, load_diary
from lagwise.models.report import format_result
from lagwise.models.spec import ModelSpec
from lagwise.models.windows import lag_windows
from lagwise.resources import demo_diary_path


@cache
def demo():
    diary = load_diary(demo_diary_path(), time=TimeSettings(mode="grid", day="day", prompt="prompt"))
    truth = json.loads((demo_diary_path().parent / "demo_truth.json").read_text(encoding="utf-8"))
    spec = ModelSpec.from_json(truth["spec"])
    return diary, spec, fit(diary, spec)


@cache
def demo_check():
    diary, spec, _ = demo()
    return lag2_check(diary, spec)


def test_readiness_counts_the_models_complete_windows_per_free_parameter():
    diary, spec, result = demo()
    ready = data_readiness(diary, result)
    complete = lag_windows(diary.select(result.items), 1).n_complete
    assert (ready.complete_windows, ready.n_free) == (complete, result.fit.n_free)
    codes = [w.code for w in fit_warnings(result, ready)]
    # the estimators' rule of thumb (common practice): about 5 windows per free parameter
    assert (AdviceCode.DATA_READINESS in codes) == (complete / result.fit.n_free < MIN_WINDOWS_PER_PARAMETER)
    assert data_readiness(diary.select(result.items[:2]), result) is None   # not this model's data
    assert data_readiness(None, result) is None


def test_an_optimiser_stopped_early_is_the_first_warning():
    diary, spec, _ = demo()
    stopped = fit(diary, spec, FitOptions(max_iter=2))
    assert not stopped.converged
    first = fit_warnings(stopped)[0]
    assert first.code == FlagCode.NOT_CONVERGED and stopped.message in first.explanation


def test_every_flag_becomes_one_warning_with_its_code_and_sentence():
    flagged = demo_check().extended     # more free parameters than 5 per window: flagged
    assert flagged.flags and flagged.converged
    warnings = fit_warnings(flagged)
    assert [w.code for w in warnings] == [f.code for f in flagged.flags]
    for w, flag in zip(warnings, flagged.flags):
        assert w.title and str(flag) in w.explanation


@pytest.mark.parametrize("code", list(FlagCode))
def test_every_flag_code_has_a_title(code):
    from lagwise.models.flags import Flag

    _, _, result = demo()
    (warning,) = fit_warnings(replace(result, flags=(Flag(code, "A sentence."),)))
    assert warning.code == code and warning.title and "A sentence." in warning.explanation


def test_the_lag2_check_counts_only_for_the_model_it_tested():
    _, spec, result = demo()
    check = demo_check()
    codes = [w.code for w in fit_warnings(result, None, check)]
    # its lag-1 model on depth-2 windows has fewer windows than 5 per free parameter (its flag)
    assert check.restricted.flagged(FlagCode.FEW_WINDOWS)
    assert AdviceCode.LAG2_FITS_FLAGGED in codes
    assert (AdviceCode.LAG2_INDICATED in codes) == bool(check.indicated)
    every_path = np.ones((spec.k, spec.k), bool)
    assert not spec.path_mask(1).all()
    other = replace(result, spec=spec.with_paths(1, every_path))   # another lag-1 model
    assert fit_warnings(other, None, check) == fit_warnings(other)


def test_report_and_caution_line_carry_every_caution():
    _, _, result = demo()
    report = format_result(result)
    line = caution_line(result)
    for caution in result.cautions:
        assert caution in report and caution in line


def test_the_readiness_findings_are_one_warning_with_each_finding_explained():
    # a short diary (the demo's first 8 days) misses more than one rule of thumb; the strip
    # lists the readiness once, with every finding in its explanation
    diary, spec, _ = demo()
    table = read_table(demo_diary_path())
    first_days = sorted(table["day"].unique())[:8]
    short = DiaryRecipe.of(diary.items, TimeSettings(mode="grid", day="day", prompt="prompt")).diary(
        table[table["day"].isin(first_days)])
    result = fit(short, spec)
    ready = data_readiness(short, result)
    assert len(ready.warnings) >= 2
    readiness = [w for w in fit_warnings(result, ready) if w.code == AdviceCode.DATA_READINESS]
    assert len(readiness) == 1
    assert all(text in readiness[0].explanation for text in ready.warnings)
