"""Start-up and screening speed of the command line, timed as whole processes.

What is timed (wall-clock seconds, best of `repeats` runs after one untimed warm-up run;
cases.py holds the targets):
- `lagwise --help` and `lagwise inspect DEMO` (the bundled demo diary, grid mode), each a
  fresh `python -m lagwise.desktop.cli` process: the cost a user meets on every call, almost
  all of it importing libraries;
- inside one process, reading and screening the demo as `lagwise inspect` does (models.recipe,
  models.summary, models.screening) with the screening's per-series memory emptied before
  each run, so every run tests every item afresh;
- `lagwise inspect` of a long diary (`INSPECT_CASE`: 9 items, a million prompts, 20% missed,
  simulated from `bench_model` and written as CSV with day and prompt columns) as one
  process, once: reading, summary and screening of every item;
- for reference, no target: the ADF and KPSS tests of the 9 items of a 10,000-prompt diary
  (`TESTS_CASE`) by models.unitroot against statsmodels' adfuller (constant, AIC, its default
  lag rule, unbounded) and kpss (level, automatic lags), interleaved, one BLAS thread each.
"""

from __future__ import annotations

import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from lagwise.models.bench.cases import Case, bench_diary, interleaved_best, timed
from lagwise.models.progress import Monitor, checkpoint

CLI = (sys.executable, "-m", "lagwise.desktop.cli")
GRID = ("--day", "day", "--prompt", "prompt")
TESTS_CASE = Case(3, 3, 10_000)


@dataclass(frozen=True)
class CommandTimes:
    help_seconds: float               # `lagwise --help`
    inspect_demo_seconds: float       # `lagwise inspect DEMO`, whole process
    screen_demo_seconds: float        # read + summary + screening of the demo, in process
    long_case: Case
    inspect_long_seconds: float       # `lagwise inspect` of the long diary, whole process
    long_answered: int                # answered prompts in the long diary
    tests_seconds: float              # models.unitroot, ADF + KPSS of TESTS_CASE's items
    peer_tests_seconds: float         # statsmodels adfuller + kpss of the same series

    @property
    def tests_ratio(self) -> float:
        return self.peer_tests_seconds / self.tests_seconds


def process_seconds(args: tuple[str, ...], repeats: int, warm_up: bool = True,
                    timeout: float = 600.0) -> float:
    """Best wall-clock seconds of `repeats` runs of `args` as a process (after one untimed
    run when `warm_up`)."""
    best = np.inf
    for run in range(max(1, repeats) + int(warm_up)):
        start = time.perf_counter()
        done = subprocess.run(args, capture_output=True, timeout=timeout, check=False)
        seconds = time.perf_counter() - start
        if done.returncode != 0:
            tail = done.stderr.decode(errors="replace").strip().splitlines()[-1:] or ["?"]
            raise RuntimeError(f"{' '.join(args[2:])} failed: {tail[0]}")
        if run or not warm_up:
            best = min(best, seconds)
    return float(best)


def screen_demo_seconds(repeats: int) -> float:
    """Best seconds of reading, summarising and screening the demo, nothing remembered."""
    from lagwise.models.diary import TimeSettings
    from lagwise.models.recipe import DiaryRecipe
    from lagwise.models.screening import screen_diary, stationarity_tests
    from lagwise.models.summary import diary_summary
    from lagwise.resources import demo_diary_path

    recipe = DiaryRecipe.of(None, TimeSettings(mode="grid", day="day", prompt="prompt"))
    best = np.inf
    for run in range(max(1, repeats) + 1):
        stationarity_tests.cache_clear()
        start = time.perf_counter()
        diary = recipe.read(demo_diary_path())
        diary_summary(diary)
        screen_diary(diary)
        if run:
            best = min(best, time.perf_counter() - start)
    return float(best)


def tests_seconds(case: Case, repeats: int) -> tuple[float, float]:
    """Best seconds of the ADF and KPSS tests of every item of `case` (20% missed, gaps
    closed up): models.unitroot, and statsmodels' adfuller and kpss at their defaults."""
    import warnings

    from statsmodels.tsa.stattools import adfuller, kpss

    from lagwise.models.blas import one_blas_thread
    from lagwise.models.unitroot import adf, kpss_level

    _, diary = bench_diary(case, p_missed=0.2)
    series = [c[~np.isnan(c)] for c in diary.values.T]

    def ours():
        return [(adf(x), kpss_level(x)) for x in series]

    def peer():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return [(adfuller(x, regression="c", autolag="AIC"),
                     kpss(x, regression="c", nlags="auto")) for x in series]

    with one_blas_thread():
        best = interleaved_best({"ours": timed(ours), "peer": timed(peer)}, repeats)
    return best["ours"][0], best["peer"][0]


def write_diary_csv(case: Case, path: Path) -> int:
    """The diary of `case` (20% missed prompts) as CSV with day and prompt columns; returns
    the number of answered prompts."""
    import pandas as pd

    _, diary = bench_diary(case, p_missed=0.2)
    frame = pd.DataFrame(np.round(diary.values, 2), columns=list(diary.items))
    frame.insert(0, "prompt", diary.prompt.astype(int))
    frame.insert(0, "day", diary.day + 1)
    frame.to_csv(path, index=False)
    return int(diary.answered.sum())


def measure_commands(case: Case, repeats: int = 3, monitor: Monitor | None = None
                     ) -> CommandTimes:
    """All the timings of this module, the long diary being `case`."""
    from lagwise.resources import demo_diary_path

    demo = str(demo_diary_path())
    checkpoint(monitor, 0.0, "Start-up: lagwise --help")
    help_s = process_seconds((*CLI, "--help"), repeats)
    checkpoint(monitor, 0.2, "Start-up: lagwise inspect DEMO")
    inspect_s = process_seconds((*CLI, "inspect", demo, *GRID), repeats)
    checkpoint(monitor, 0.4, "Screening the demo in process")
    screen_s = screen_demo_seconds(repeats)
    checkpoint(monitor, 0.45, f"ADF and KPSS against statsmodels, {TESTS_CASE.label}")
    ours_s, peer_s = tests_seconds(TESTS_CASE, repeats)
    checkpoint(monitor, 0.5, f"Writing the long diary ({case.label})")
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "long_diary.csv"
        answered = write_diary_csv(case, path)
        checkpoint(monitor, 0.7, f"lagwise inspect, {case.label}")
        long_s = process_seconds((*CLI, "inspect", str(path), *GRID), 1, warm_up=False)
    checkpoint(monitor, 1.0, "Command line: done")
    return CommandTimes(help_seconds=help_s, inspect_demo_seconds=inspect_s,
                        screen_demo_seconds=screen_s, long_case=case,
                        inspect_long_seconds=long_s, long_answered=answered,
                        tests_seconds=ours_s, peer_tests_seconds=peer_s)
