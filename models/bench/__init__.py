"""`lagwise bench`: speed and memory of the estimators, against semopy and statsmodels in the
same process, on diaries simulated from a known model (cases.py).

Sections (each module's docstring says what it times and why that peer):
- windows.py: Lagwise's first-copy-free fit against semopy's covariance-only Model fitting the
  same window model (fit + inspect), interleaved, BLAS on one thread for both; semopy's
  ModelMeans (the same mean structure too) as a reference row; stationary against
  first-copy-free;
- refit.py: a full fit against a refit (no standard errors, started from a first fit) on
  parametric-bootstrap diaries, with the default estimator;
- exact.py: the exact estimator against statsmodels' DynamicFactor, and its evaluation cost
  per prompt as diaries grow, with days and as one segment;
- continuous.py: the continuous-time estimator against the exact one on an irregular diary
  (part of the exact section);
- memory.py: peak memory of one fit of a long diary, and of reading a long diary file, in a
  fresh process;
- commandline.py: start-up of `lagwise --help` and `lagwise inspect` of the demo, the demo's
  reading and screening, and `lagwise inspect` of a diary of a million prompts.
Targets (cases.py), reported as PASS/MISS lines (report.py), never as timed tests: semopy's
covariance-only fit + inspect takes at least 2x the Lagwise first-copy-free time on both speed
diaries; stationary within 1.5x of first-copy-free; statsmodels takes at least 5x the Lagwise
exact time; exact gradient time growing at most as T^1.1 on both layouts; continuous time
within 3x the exact time; peak memory under
1 GiB; reading a diary file under 4x its size; `lagwise --help` under 0.5 s, `lagwise inspect`
of the demo under 2 s (its reading and screening under 1 s) and of a million prompts under
30 s (absolute: start-up has no peer). The refit has no target: its speed-up is reported as a
fact.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from lagwise.models.bench.cases import (
    EXACT_CASE, EXACT_MEMORY_CASE, EXACT_SIZES, INSPECT_CASE, MEMORY_CASE, MEMORY_TARGET_BYTES,
    QUICK_EXACT_CASE, QUICK_INSPECT_CASE, QUICK_EXACT_MEMORY_CASE, QUICK_EXACT_SIZES, QUICK_MEMORY_CASE,
    QUICK_READ_ROWS, QUICK_REFIT_REPLICATES, QUICK_SPEED_CASES, READ_ROWS, REFIT_REPLICATES,
    SPEED_CASES, SPEED_TARGET, Case,
    bench_diary, bench_model,
)
from lagwise.models.bench.commandline import CommandTimes, measure_commands
from lagwise.models.bench.continuous import ContinuousSpeedResult, measure_continuous_speed
from lagwise.models.bench.exact import (
    ExactEvaluation, ExactSpeedResult, growth_exponent, measure_exact_evaluation,
    measure_exact_speed,
)
from lagwise.models.bench.refit import RefitResult, measure_refit
from lagwise.models.bench.report import format_report
from lagwise.models.bench.windows import PeerTime, SpeedResult, measure_speed
from lagwise.models.progress import Monitor, checkpoint

if TYPE_CHECKING:
    from lagwise.models.bench.memory import MemoryResult, ReadMemoryResult

# memory.py also runs as the child program (python -m lagwise.models.bench.memory): it is
# loaded on first use of these names, so that run does not find it already imported
_MEMORY_NAMES = ("MemoryResult", "ReadMemoryResult", "measure_memory", "measure_read_memory")


def __getattr__(name: str):
    if name in _MEMORY_NAMES:
        from lagwise.models.bench import memory

        return getattr(memory, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


@dataclass
class BenchReport:
    speed: list[SpeedResult] = field(default_factory=list)
    refit: list[RefitResult] = field(default_factory=list)
    memory: MemoryResult | None = None
    repeats: int = 1
    semopy_threads: str = "1"
    exact_speed: ExactSpeedResult | None = None
    exact_evaluations: list[ExactEvaluation] = field(default_factory=list)
    exact_segment_evaluations: list[ExactEvaluation] = field(default_factory=list)  # one segment
    exact_memory: MemoryResult | None = None
    continuous_speed: ContinuousSpeedResult | None = None
    read_memory: ReadMemoryResult | None = None
    commands: CommandTimes | None = None


def run_benchmark(quick: bool = False, repeats: int | None = None, all_peers: bool = False,
                  memory: bool = True, semopy_threads: str = "1", windows: bool = True,
                  exact: bool = True, refit: bool = True, commands: bool = True,
                  monitor: Monitor | None = None) -> BenchReport:
    """All measurements; `quick` uses the small cases only, fewer refit replicates and
    10,000-prompt memory runs; `windows` / `exact` choose the sections (window estimators
    against semopy, with the refit unless `refit` is False; the exact estimator against
    statsmodels; `commands` the start-up and screening of the command line)."""
    from lagwise.models.bench.memory import measure_memory, measure_read_memory

    repeats = (1 if quick else 3) if repeats is None else repeats
    report = BenchReport(repeats=repeats, semopy_threads=semopy_threads)
    cases = (QUICK_SPEED_CASES if quick else SPEED_CASES) if windows else ()
    refit_cases = cases if refit else ()
    parts = (len(cases) + len(refit_cases) + 2 * int(windows and memory)
             + (4 + int(memory) if exact else 0) + int(commands))
    done = 0
    for case in cases:
        checkpoint(monitor, done / parts, f"Timing {case.label}")
        report.speed.append(measure_speed(case, repeats, True if all_peers else None,
                                          semopy_threads))
        done += 1
    for case in refit_cases:
        checkpoint(monitor, done / parts, f"Refit, {case.label}")
        report.refit.append(measure_refit(
            case, QUICK_REFIT_REPLICATES if quick else REFIT_REPLICATES))
        done += 1
    if windows and memory:
        checkpoint(monitor, done / parts, "Peak memory of a long diary")
        report.memory = measure_memory(QUICK_MEMORY_CASE if quick else MEMORY_CASE)
        checkpoint(monitor, (done + 1) / parts, "Peak memory of reading a long diary file")
        report.read_memory = measure_read_memory(QUICK_READ_ROWS if quick else READ_ROWS)
        done += 2
    if exact:
        case = QUICK_EXACT_CASE if quick else EXACT_CASE
        checkpoint(monitor, done / parts, f"Exact estimator: timing {case.label}")
        report.exact_speed = measure_exact_speed(case, repeats)
        sizes = QUICK_EXACT_SIZES if quick else EXACT_SIZES
        checkpoint(monitor, (done + 1) / parts, "Exact estimator: evaluation cost")
        report.exact_evaluations = measure_exact_evaluation(sizes, repeats)
        checkpoint(monitor, (done + 2) / parts, "Exact estimator: evaluation cost, one segment")
        report.exact_segment_evaluations = measure_exact_evaluation(sizes, repeats,
                                                                    one_segment=True)
        if memory:
            checkpoint(monitor, (done + 3) / parts, "Exact estimator: peak memory of a long diary")
            report.exact_memory = measure_memory(
                QUICK_EXACT_MEMORY_CASE if quick else EXACT_MEMORY_CASE, estimator="exact")
        checkpoint(monitor, (done + 3 + int(memory)) / parts, "Continuous-time estimator: timing")
        report.continuous_speed = measure_continuous_speed(case, repeats)
        done += 4 + int(memory)
    if commands:
        checkpoint(monitor, done / parts, "Command line: start-up and screening")
        report.commands = measure_commands(QUICK_INSPECT_CASE if quick else INSPECT_CASE,
                                           repeats)
    checkpoint(monitor, 1.0, "Done")
    return report


__all__ = [
    "BenchReport", "Case", "CommandTimes", "INSPECT_CASE", "EXACT_CASE", "EXACT_MEMORY_CASE", "EXACT_SIZES", "ExactEvaluation",
    "ExactSpeedResult", "MEMORY_CASE", "MEMORY_TARGET_BYTES", "MemoryResult", "PeerTime",
    "REFIT_REPLICATES", "ReadMemoryResult", "RefitResult", "SPEED_CASES", "SPEED_TARGET", "SpeedResult",
    "bench_diary", "bench_model", "format_report", "growth_exponent", "measure_exact_evaluation",
    "measure_commands", "measure_exact_speed", "measure_memory", "measure_read_memory",
    "measure_refit", "measure_speed", "run_benchmark",
]
