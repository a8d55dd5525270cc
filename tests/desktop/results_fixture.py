"""A real fit of the bundled demo diary for the results-view tests (computed once per run)."""

from __future__ import annotations

import json
from dataclasses import replace
from functools import cache
from pathlib import Path

import numpy as np

from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.estimate import fit
from lagwise.models.results import FitResult
from lagwise.models.estimators import FitOptions
from lagwise.models.spec import ModelSpec
from lagwise.models.recipe import load_diary

DEMO = Path(__file__).resolve().parents[2] / "resources" / "demo"


@cache
def demo_diary() -> Diary:
    return load_diary(DEMO / "demo_diary.csv", time=TimeSettings(mode="grid", day="day", prompt="prompt"))


def demo_spec() -> ModelSpec:
    return ModelSpec.from_json(json.loads((DEMO / "demo_truth.json").read_text(encoding="utf-8"))["spec"])


@cache
def demo_result() -> FitResult:
    """The demo's own specification, default estimator (stationary windows, full information)."""
    return fit(demo_diary(), demo_spec())


@cache
def demo_variant() -> FitResult:
    """The demo with every lag-1 path free, own lag-2 paths, and partial-correlation innovations.

    Shows paths both ways between states, a second lag, and the partial-correlation form.
    """
    spec = replace(demo_spec(), innovations="partial").with_lags(2)
    k = spec.k
    spec = spec.with_paths(1, np.ones((k, k), bool)).with_paths(2, np.eye(k, dtype=bool))
    return fit(demo_diary(), spec, FitOptions())
