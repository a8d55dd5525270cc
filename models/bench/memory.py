"""Peak memory of one fit of a long diary, in a fresh Python process.

`measure_memory` starts `python -m lagwise.models.bench.memory STATES ITEMS OCCASIONS
[--prompts N] [--estimator NAME]`; that child simulates the diary (10% missed prompts), fits
it once with the default (stationary, full-information) or the exact estimator and prints one
JSON line. A fresh process makes the peak that run's alone: the peak resident set size where
the platform reports it (Linux, macOS), else tracemalloc's peak; the peak after the imports
is reported beside it. Target: under 1 GiB (cases.MEMORY_TARGET_BYTES).

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

from lagwise.models.bench.cases import PROMPTS_PER_DAY, Case, bench_diary
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
    """Entry point of the child run (`python -m lagwise.models.bench.memory k m T`)."""
    parser = argparse.ArgumentParser(prog=f"python -m {CHILD}")
    parser.add_argument("size", nargs=3, type=int, metavar=("STATES", "ITEMS", "OCCASIONS"))
    parser.add_argument("--prompts", type=int, default=PROMPTS_PER_DAY)
    parser.add_argument("--estimator", default="stationary")
    args = parser.parse_args(argv)
    print(json.dumps(_memory_child(*args.size, prompts=args.prompts, estimator=args.estimator)))
    return 0


if __name__ == "__main__":
    sys.exit(_main(sys.argv[1:]))
