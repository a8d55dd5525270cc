"""Planning speed: 200 replications of 3 designs (20, 40, 60 days of 6 prompts, 75%
answered) of the demo model (resources/demo/demo_truth.json), on 2 local processes. Run with
`pytest -m bench tests/benchmarks/test_bench_plan.py -s`.

The time is reported, never asserted (DEVELOPERS.md, "Speed"). What is asserted: every
diary was simulated and nearly all refits converged.
"""

from __future__ import annotations

import json
import os
import time

import numpy as np
import pytest

from lagwise.desktop.app import DEMO_TRUTH
from lagwise.models.design import Design
from lagwise.models.plan import run_plan
from lagwise.models.plantruth import Truth
from lagwise.models.spec import ModelSpec

pytestmark = pytest.mark.bench


def demo_truth() -> Truth:
    doc = json.loads(DEMO_TRUTH.read_text(encoding="utf-8"))
    return Truth(ModelSpec.from_json(doc["spec"]), np.array(doc["loadings"]),
                 np.array(doc["intercepts"]), np.array(doc["unique"]),
                 tuple(np.array(m) for m in doc["lagged"]), np.array(doc["innovation"]),
                 np.zeros(len(doc["items"])))


def test_plan_speed_of_the_demo_model_on_two_processes():
    truth = demo_truth()
    designs = [Design(days, 6, 0.75) for days in (20, 40, 60)]
    run_plan(truth, designs[:1], replications=2, jobs=2)     # start the worker processes
    start = time.perf_counter()
    plan = run_plan(truth, designs, replications=200, seed=1, jobs=2)
    seconds = time.perf_counter() - start
    print(f"\nplan of the demo model, 3 designs x 200 replications on 2 processes: "
          f"{seconds:.1f} s (load average {os.getloadavg()[0]:.1f})")
    for s in plan.designs:
        print(f"  {s.design.days} days: converged {s.converged} of {s.replications}")
    print("\n".join(plan.sentences()))
    assert all(s.replications == 200 for s in plan.designs)
    assert all(s.converged >= 190 for s in plan.designs)
