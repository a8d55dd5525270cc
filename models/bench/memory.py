"""Peak memory of one fit of a long diary, in a fresh Python process.

`measure_memory` starts `python -m lagwise.models.bench.memory STATES ITEMS OCCASIONS
[--prompts N] [--estimator NAME]`; that child simulates the diary (10% missed prompts), fits
it once with the default (stationary, full-information) or the exact estimator and prints one
JSON line. A fresh process makes the peak that run's alone: the peak resident set size where
the platform reports it (Linux, macOS), else tracemalloc's peak; the peak after the imports
is reported beside it. Target: under 1 GiB (cases.MEMORY_TARGET_BYTES).

`measure_read_memory` writes a long diary file (a time column, items and a comment column
the recipe does not use) and starts `python -m lagwise.models.bench.memory --read FILE`; that
child reads it into a diary with the items named (models.recipe) and reports its peak the same
way. Target: the peak above the imports under 4 times the file's size
(cases.READ_TARGET_RATIO).

The package's __init__ loads this module only when its names are asked for, so running it
as the child program does not import it twice.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
from dataclasses import dataclass
from pathlib import Path

from lagwise.models.bench.cases import PROMPTS_PER_DAY, READ_ITEMS, Case, bench_diary
from lagwise.models.estimators import FitOptions

CHILD = "lagwise.models.bench.memory"


@dataclass(frozen=True)
class MemoryResult:
    case: Case
    peak_bytes: int
    baseline_bytes: int
    method: str
    seconds: float
    n_windows: int          # windows, or answered occasions for the exact estimator
    converged: bool
    estimator: str = "stationary"


def measure_memory(case: Case, timeout: float = 3600.0, estimator: str = "stationary"
                   ) -> MemoryResult:
    """Peak memory of one fit of `case` (10% missed prompts) in a fresh process, with the
    default (stationary, full-information) or the exact estimator."""
    cmd = [sys.executable, "-m", CHILD, str(case.states), str(case.items), str(case.occasions),
           "--prompts", str(case.prompts), "--estimator", estimator]
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, check=False)
    if done.returncode != 0:
        tail = done.stderr.strip().splitlines()[-1:] or ["no message"]
        raise RuntimeError(f"the memory run failed: {tail[0]}")
    doc = json.loads(done.stdout.strip().splitlines()[-1])
    return MemoryResult(case=case, peak_bytes=int(doc["peak_bytes"]),
                        baseline_bytes=int(doc["baseline_bytes"]), method=doc["method"],
                        seconds=float(doc["seconds"]), n_windows=int(doc["n_windows"]),
                        converged=bool(doc["converged"]), estimator=estimator)


@dataclass(frozen=True)
class ReadMemoryResult:
    rows: int
    file_bytes: int
    peak_bytes: int
    baseline_bytes: int
    method: str
    seconds: float

    @property
    def ratio(self) -> float:
        """Peak memory above the imports, as a multiple of the file's size."""
        return (self.peak_bytes - self.baseline_bytes) / self.file_bytes


def write_long_diary(path: Path, rows: int, seed: int = 1) -> None:
    """A diary file of `rows` prompts ten minutes apart: time, READ_ITEMS items, a comment."""
    import numpy as np
    import pandas as pd

    rng = np.random.default_rng(seed)
    start = np.datetime64("2020-01-01T08:00")
    for first in range(0, rows, 500_000):
        n = min(500_000, rows - first)
        frame = pd.DataFrame(np.round(rng.normal(50, 15, (n, READ_ITEMS)), 1),
                             columns=[f"item{j + 1}" for j in range(READ_ITEMS)])
        stamps = start + (first + np.arange(n)) * np.timedelta64(10, "m")
        frame.insert(0, "time", pd.DatetimeIndex(stamps).strftime("%Y-%m-%d %H:%M"))
        frame["comment"] = "ok"
        frame.to_csv(path, mode="a" if first else "w", header=not first, index=False)


def measure_read_memory(rows: int, timeout: float = 3600.0) -> ReadMemoryResult:
    """Peak memory of reading a `rows`-prompt diary file in a fresh process."""
    import tempfile

    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "long_diary.csv"
        write_long_diary(path, rows)
        cmd = [sys.executable, "-m", CHILD, "--read", str(path)]
        done = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, check=False)
        size = path.stat().st_size
    if done.returncode != 0:
        tail = done.stderr.strip().splitlines()[-1:] or ["no message"]
        raise RuntimeError(f"the reading run failed: {tail[0]}")
    doc = json.loads(done.stdout.strip().splitlines()[-1])
    return ReadMemoryResult(rows=rows, file_bytes=size, peak_bytes=int(doc["peak_bytes"]),
                            baseline_bytes=int(doc["baseline_bytes"]), method=doc["method"],
                            seconds=float(doc["seconds"]))


def _read_child(path: str) -> dict:
    method, peak = _peak_reader()
    from lagwise.models.diary import TimeSettings
    from lagwise.models.recipe import DiaryRecipe

    baseline = peak()
    start = time.perf_counter()
    items = [f"item{j + 1}" for j in range(READ_ITEMS)]
    DiaryRecipe.of(items, TimeSettings(mode="timestamp", time="time")).read(path)
    return {"peak_bytes": int(peak()), "baseline_bytes": int(baseline), "method": method,
            "seconds": time.perf_counter() - start}


def _peak_reader():
    """(method, read()) giving this process's peak memory in bytes so far.

    Linux: VmHWM of /proc/self/status (the peak resident set of this program's memory; the
    rusage maximum is not used there because it keeps the parent's size across the exec that
    starts a child). macOS: the rusage maximum resident set (bytes). Elsewhere (Windows):
    tracemalloc's peak of Python-level allocations, numpy's arrays included.
    """
    status = Path("/proc/self/status")
    if status.exists():
        def vm_hwm() -> int:
            for line in status.read_text().splitlines():
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
            raise RuntimeError("no VmHWM line in /proc/self/status")

        vm_hwm()
        return "peak resident set size (VmHWM)", vm_hwm
    try:
        import resource
    except ImportError:
        import tracemalloc

        tracemalloc.start()
        return "tracemalloc peak", lambda: tracemalloc.get_traced_memory()[1]
    scale = 1 if sys.platform == "darwin" else 1024  # ru_maxrss: bytes on macOS, else KiB
    return "peak resident set size (getrusage)", \
        lambda: resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * scale


def _memory_child(states: int, items: int, occasions: int, prompts: int = PROMPTS_PER_DAY,
                  estimator: str = "stationary") -> dict:
    method, peak = _peak_reader()
    from lagwise.models.estimate import fit  # imports count in the baseline

    baseline = peak()
    spec, diary = bench_diary(Case(states, items, occasions, prompts), p_missed=0.1)
    start = time.perf_counter()
    result = fit(diary, spec, FitOptions(estimator=estimator))
    return {"peak_bytes": int(peak()), "baseline_bytes": int(baseline), "method": method,
            "seconds": time.perf_counter() - start, "n_windows": result.n_windows,
            "converged": bool(result.converged)}


def _main(argv: list[str]) -> int:
    """Entry point of the child run (`python -m lagwise.models.bench.memory k m T`, or
    `--read FILE`)."""
    parser = argparse.ArgumentParser(prog=f"python -m {CHILD}")
    if argv[:1] == ["--read"]:
        print(json.dumps(_read_child(argv[1])))
        return 0
    parser.add_argument("size", nargs=3, type=int, metavar=("STATES", "ITEMS", "OCCASIONS"))
    parser.add_argument("--prompts", type=int, default=PROMPTS_PER_DAY)
    parser.add_argument("--estimator", default="stationary")
    args = parser.parse_args(argv)
    print(json.dumps(_memory_child(*args.size, prompts=args.prompts, estimator=args.estimator)))
    return 0


if __name__ == "__main__":
    sys.exit(_main(sys.argv[1:]))
