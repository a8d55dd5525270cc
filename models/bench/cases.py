"""The benchmark diaries, the targets and the timing helpers of `lagwise bench`.

Every diary is simulated here from one known stationary model (`bench_model`): k states x m
items, days of `prompts` prompts, complete answers unless prompts are missed on purpose.
Times are wall-clock seconds; a time is the best of several runs after an untimed warm-up
run (common practice for benchmarks: the minimum is least disturbed by other work on the
machine), and runs that are compared are interleaved (`interleaved_best`), so a burst of
other work on the machine slows both sides of a ratio alike.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from lagwise.models.diary import Diary
from lagwise.models.spec import ModelSpec, make_spec

PROMPTS_PER_DAY = 10

# targets, reported as PASS/MISS lines (never timed tests)
SPEED_TARGET = 2.0            # semopy, covariance only (fit + inspect) takes at least 2x Lagwise
STATIONARY_TARGET = 1.5       # stationary within 1.5x of first-copy-free
MEMORY_TARGET_BYTES = 1024 ** 3
READ_TARGET_RATIO = 4.0       # reading a diary file: peak memory under 4x the file's size
EXACT_SPEED_TARGET = 5.0      # statsmodels DynamicFactor takes at least 5x Lagwise exact
EXACT_GROWTH_TARGET = 1.1     # exact gradient time grows at most as T^1.1
CONTINUOUS_TARGET = 3.0       # continuous time within 3x the exact time on the same diary
HELP_TARGET = 0.5             # seconds, `lagwise --help` as a whole process
INSPECT_DEMO_TARGET = 2.0     # seconds, `lagwise inspect` of the demo as a whole process
SCREEN_DEMO_TARGET = 1.0      # seconds, reading and screening the demo inside the process
INSPECT_LONG_TARGET = 30.0    # seconds, `lagwise inspect` of the long diary, whole process

# semopy's ModelMeans works on the raw rows at every step (its gradient loops over the
# parameters with row-sized products): one fit of the 6 x 5, T = 2,000 diary took about 2
# minutes on a 2-core machine, so above this many occasions it runs only when asked
MEANS_PEER_LIMIT = 500


@dataclass(frozen=True)
class Case:
    """A benchmark diary: `states` x `items` (items per state), `occasions` prompts."""

    states: int
    items: int
    occasions: int
    prompts: int = PROMPTS_PER_DAY

    @property
    def label(self) -> str:
        days = "" if self.prompts == PROMPTS_PER_DAY else f", days of {self.prompts}"
        return f"{self.states} states x {self.items} items, T = {self.occasions:,}{days}"

    @property
    def days(self) -> int:
        return max(1, self.occasions // self.prompts)


SPEED_CASES = (Case(3, 4, 200), Case(6, 5, 2000))
QUICK_SPEED_CASES = (Case(3, 4, 200),)
REFIT_REPLICATES = 5
QUICK_REFIT_REPLICATES = 3
MEMORY_CASE = Case(6, 5, 100_000)
QUICK_MEMORY_CASE = Case(6, 5, 10_000)
READ_ROWS, QUICK_READ_ROWS, READ_ITEMS = 3_000_000, 1_000_000, 10  # about 200 MB and 70 MB
EXACT_CASE = Case(3, 3, 1000, prompts=8)
QUICK_EXACT_CASE = Case(3, 3, 400, prompts=8)
EXACT_SIZES = (1_000, 10_000, 100_000)
QUICK_EXACT_SIZES = (1_000, 10_000)
EXACT_MEMORY_CASE = Case(3, 3, 100_000, prompts=8)
QUICK_EXACT_MEMORY_CASE = Case(3, 3, 10_000, prompts=8)
INSPECT_CASE = Case(3, 3, 1_000_000)          # 9 items, a million prompts
QUICK_INSPECT_CASE = Case(3, 3, 100_000)


def bench_model(states: int, items: int) -> tuple[ModelSpec, dict]:
    """A stationary model: loadings 1 (marker), 0.9, 0.8, ...; inertia 0.4; each state's
    cross-lagged effect on the next state 0.1; innovation variances 1, correlations 0.2;
    unique variances 0.5; intercepts 0, 0.1, 0.2, ... All lagged paths free in the spec."""
    names = {f"state{s + 1}": [f"s{s + 1}_item{j + 1}" for j in range(items)]
             for s in range(states)}
    spec = make_spec(names, lags=1)
    p = states * items
    lam = np.zeros((p, states))
    for s in range(states):
        lam[s * items:(s + 1) * items, s] = 1.0 - 0.1 * np.arange(items)
    b = 0.4 * np.eye(states)
    if states > 1:
        for s in range(states):
            b[(s + 1) % states, s] = 0.1
    psi = 0.8 * np.eye(states) + 0.2
    return spec, {"loadings": lam, "intercepts": 0.1 * np.arange(p), "unique": np.full(p, 0.5),
                  "lagged": [b], "innovation": psi}


def bench_diary(case: Case, seed: int = 1, p_missed: float = 0.0) -> tuple[ModelSpec, Diary]:
    """The model of `bench_model` and a diary of `case` simulated from it."""
    from lagwise.models.simulate import simulate_diary

    spec, truth = bench_model(case.states, case.items)
    diary = simulate_diary(spec, days=case.days, prompts_per_day=case.prompts,
                           p_missed=p_missed, seed=seed, **truth)
    return spec, diary


def best_time(run: Callable[[], Any], repeats: int, warm_up: bool = True) -> tuple[float, Any]:
    """Best wall-clock seconds of `repeats` calls, after one untimed warm-up call (imports
    and first-call costs are not part of a fit's time), and the last call's result."""
    if warm_up:
        run()
    best, out = np.inf, None
    for _ in range(max(1, repeats)):
        start = time.perf_counter()
        out = run()
        best = min(best, time.perf_counter() - start)
    return best, out


Timed = Callable[[], tuple[float, Any]]   # one run: (its seconds, its result)


def timed(call: Callable[[], Any]) -> Timed:
    """`call` as a run that measures its own wall-clock seconds."""
    def run() -> tuple[float, Any]:
        start = time.perf_counter()
        out = call()
        return time.perf_counter() - start, out
    return run


def interleaved_best(runs: Mapping[str, Timed], repeats: int) -> dict[str, tuple[float, Any]]:
    """Best seconds of each run and its last result: one untimed warm-up call of each, then
    `repeats` rounds that call every run once, in turn. A run reports its own seconds, so a
    peer can leave out work that is not its own (preparing its input)."""
    for run in runs.values():
        run()
    best: dict[str, tuple[float, Any]] = {name: (np.inf, None) for name in runs}
    for _ in range(max(1, repeats)):
        for name, run in runs.items():
            seconds, out = run()
            best[name] = (min(best[name][0], seconds), out)
    return best
