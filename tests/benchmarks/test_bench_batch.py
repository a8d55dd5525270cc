"""Batch speed: 100 simulated people, each 3 states x 3 items over 250 prompts (50 days of 5),
fitted with one and with two local worker processes. Run with
`pytest -m bench tests/benchmarks/test_bench_batch.py -s`.

The speed-up (seconds with 1 process / seconds with 2) is reported, never asserted
(DEVELOPERS.md, "Speed"). What is asserted: every person was fitted, and both runs give the
same estimates (the people are independent, so the number of processes cannot matter).
"""

from __future__ import annotations

import os
import time

import numpy as np
import pandas as pd
import pytest

from lagwise.models.batch import run_batch
from lagwise.models.diary import TimeSettings
from lagwise.models.personfit import FITTED, BatchSettings
from lagwise.models.recipe import DiaryRecipe
from lagwise.models.simulate import simulate_diary
from lagwise.models.spec import make_spec
from lagwise.models.study import study_from_frame

pytestmark = pytest.mark.bench

PEOPLE, DAYS, PROMPTS = 100, 50, 5
SPEC = make_spec({"calm": ["c1", "c2", "c3"], "drive": ["d1", "d2", "d3"],
                  "worry": ["w1", "w2", "w3"]}, lags=1)
# our own invented truth for the simulation (a speed test: no estimate is checked against it)
TRUE = dict(
    loadings=np.kron(np.eye(3), np.array([[1.0], [0.8], [1.2]])),
    intercepts=np.full(9, 3.0), unique=np.full(9, 0.5),
    lagged=[np.array([[0.4, 0.1, 0.0], [0.0, 0.3, -0.1], [0.1, 0.0, 0.35]])],
    innovation=np.array([[1.0, 0.2, 0.1], [0.2, 0.8, 0.0], [0.1, 0.0, 0.9]]),
)


def _study():
    frames = []
    for person in range(PEOPLE):
        diary = simulate_diary(SPEC, **TRUE, days=DAYS, prompts_per_day=PROMPTS, p_missed=0.2,
                               seed=person)
        table = pd.DataFrame(diary.values, columns=diary.items)
        frames.append(table.assign(person=f"person {person}", day=diary.day + 1,
                                   prompt=diary.prompt.astype(int)))
    recipe = DiaryRecipe.of(SPEC.items, TimeSettings(mode="grid", day="day", prompt="prompt"))
    return study_from_frame(pd.concat(frames, ignore_index=True), recipe, "person")


def test_batch_speed_with_one_and_two_processes(tmp_path):
    study = _study()
    seconds, estimates = {}, {}
    for jobs in (1, 2):
        run_batch(study.__class__(study.person_column, study.people[:2]), BatchSettings(SPEC),
                  tmp_path / f"warm-{jobs}", jobs=jobs)   # start the worker processes first
        start = time.perf_counter()
        outcome = run_batch(study, BatchSettings(SPEC), tmp_path / f"jobs-{jobs}", jobs=jobs)
        seconds[jobs] = time.perf_counter() - start
        assert all(o.status == FITTED for o in outcome.outcomes), outcome.not_fitted[:3]
        estimates[jobs] = [[p["estimate"] for p in o.document["parameters"]]
                           for o in outcome.outcomes]
    np.testing.assert_array_equal(estimates[1], estimates[2])
    print(f"\nbatch of {PEOPLE} people (3 states x 3 items, {DAYS * PROMPTS} prompts): "
          f"1 process {seconds[1]:.1f} s, 2 processes {seconds[2]:.1f} s, "
          f"speed-up {seconds[1] / seconds[2]:.2f} (load average {os.getloadavg()[0]:.1f}: "
          f"other work on the machine takes cores from the workers)")
