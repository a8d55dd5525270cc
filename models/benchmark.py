"""Speed and memory of the window estimators, measured against semopy in the same process.

Three measurements (issue 3, item 6), each on a diary simulated here from a known stationary
model (k states x m items, 10 prompts a day, complete answers):
- speed: wall-clock seconds of `models.estimate.fit` with the first-copy-free estimator
  (windows, start values, optimisation, standard errors, fit indices) against semopy fitting
  the same first-copy-free window model on the same complete windows and giving the same
  outputs (model built from its text, data loaded, optimised, parameter table with standard
  errors, fit statistics) -> ratio semopy / Lagwise. Both run with BLAS on one thread (the
  Lagwise estimator always does; `semopy_threads="default"` leaves semopy's BLAS threads
  alone). The semopy peers: covariance-only ML ("free" means, semopy's default objective, the faster peer) and,
  where it finishes in reasonable time, ModelMeans with the same item intercepts as Lagwise
  (models.reference_sem). Each time is the best of `repeats` runs after an untimed warm-up
  run (common practice for benchmarks: the minimum is least disturbed by other work on the
  machine);
- the stationary estimator against the first-copy-free one on the same diary -> ratio;
- peak memory of one default fit (stationary, full information) of a long diary with missed
  prompts, in a fresh Python process so the peak is that run's alone: the peak resident set
  size where the platform reports it (Linux, macOS), else tracemalloc's peak.
Targets: Lagwise at least 4x faster than semopy; stationary within 1.5x of first-copy-free;
peak memory under 1 GB. These are reported as PASS/MISS lines, never as timed tests.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from models.diary import Diary
from models.progress import Monitor, checkpoint
from models.spec import FitOptions, ModelSpec, make_spec

PROMPTS_PER_DAY = 10
SPEED_TARGET = 4.0
STATIONARY_TARGET = 1.5
MEMORY_TARGET_BYTES = 1024 ** 3
# ModelMeans works on the raw rows at every step (its gradient loops over the parameters
# with row-sized products): one fit of the 6 x 5, T = 2,000 diary took about 2 minutes on a
# 2-core machine, so above this many occasions it runs only when asked
MEANS_PEER_LIMIT = 500


@dataclass(frozen=True)
class Case:
    """A benchmark diary: `states` x `items` (items per state), `occasions` prompts."""

    states: int
    items: int
    occasions: int

    @property
    def label(self) -> str:
        return f"{self.states} states x {self.items} items, T = {self.occasions:,}"


SPEED_CASES = (Case(3, 4, 200), Case(6, 5, 2000))
QUICK_SPEED_CASES = (Case(3, 4, 200),)
MEMORY_CASE = Case(6, 5, 100_000)
QUICK_MEMORY_CASE = Case(6, 5, 10_000)


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
    from models.simulate import simulate_diary

    spec, truth = bench_model(case.states, case.items)
    days = max(1, case.occasions // PROMPTS_PER_DAY)
    diary = simulate_diary(spec, days=days, prompts_per_day=PROMPTS_PER_DAY, p_missed=p_missed,
                           seed=seed, **truth)
    return spec, diary


def _best_time(run, repeats: int):
    """Best wall-clock seconds of `repeats` calls, after one untimed warm-up call (imports
    and first-call costs are not part of a fit's time), and the last call's result."""
    run()
    best, out = np.inf, None
    for _ in range(max(1, repeats)):
        start = time.perf_counter()
        out = run()
        best = min(best, time.perf_counter() - start)
    return best, out


@dataclass(frozen=True)
class PeerTime:
    """One semopy peer: its label, best seconds (None when not run) and agreement."""

    name: str
    seconds: float | None
    ratio: float | None            # semopy seconds / Lagwise first-copy-free seconds
    max_path_difference: float | None
    converged: bool | None
    note: str = ""


@dataclass(frozen=True)
class SpeedResult:
    case: Case
    n_windows: int
    lagwise_seconds: float
    lagwise_converged: bool
    stationary_seconds: float
    stationary_converged: bool
    peers: tuple[PeerTime, ...]

    @property
    def stationary_ratio(self) -> float:
        return self.stationary_seconds / self.lagwise_seconds


@dataclass(frozen=True)
class MemoryResult:
    case: Case
    peak_bytes: int
    baseline_bytes: int
    method: str
    seconds: float
    n_windows: int
    converged: bool


@dataclass
class BenchReport:
    speed: list[SpeedResult] = field(default_factory=list)
    memory: MemoryResult | None = None
    repeats: int = 1
    semopy_threads: str = "1"


def measure_speed(case: Case, repeats: int = 3, means_peer: bool | None = None,
                  semopy_threads: str = "1", monitor: Monitor | None = None) -> SpeedResult:
    """Time Lagwise (both window estimators) and the semopy peers on one case."""
    from models import reference_sem
    from models.estimate import fit
    from models.windows import lag_windows

    spec, diary = bench_diary(case)
    checkpoint(monitor, 0.0, f"{case.label}: Lagwise first-copy-free")
    fcf_s, fcf = _best_time(lambda: fit(diary, spec, FitOptions(estimator="first-copy-free")),
                            repeats)
    checkpoint(monitor, 0.2, f"{case.label}: Lagwise stationary")
    st_s, st = _best_time(lambda: fit(diary, spec, FitOptions(estimator="stationary")), repeats)
    windows = lag_windows(diary, 1)
    peers = []
    run_means = case.occasions <= MEANS_PEER_LIMIT if means_peer is None else means_peer
    for means, name in (("free", "semopy, covariance only (ML)"),
                        ("items", "semopy, same item intercepts (ML)")):
        if means == "items" and not run_means:
            peers.append(PeerTime(name, None, None, None, None,
                                  "not run: about 2 minutes per fit here (--all-peers runs it)"))
            continue
        checkpoint(monitor, 0.4 if means == "free" else 0.7, f"{case.label}: {name}")
        sec, ref = _best_time(lambda: reference_sem.fit_windows(
            windows, spec, means=means, precise=False, report=True,
            single_thread=semopy_threads == "1"), repeats)
        diff = float(np.max(np.abs(ref.lagged[0] - fcf.lagged[0])))
        peers.append(PeerTime(name, sec, sec / fcf_s, diff, ref.converged))
    return SpeedResult(case=case, n_windows=fcf.n_windows, lagwise_seconds=fcf_s,
                       lagwise_converged=fcf.converged, stationary_seconds=st_s,
                       stationary_converged=st.converged, peers=tuple(peers))


def measure_memory(case: Case, timeout: float = 3600.0) -> MemoryResult:
    """Peak memory of one default fit of `case` (10% missed prompts) in a fresh process."""
    cmd = [sys.executable, "-m", "models.benchmark", "--memory-child", str(case.states),
           str(case.items), str(case.occasions)]
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, check=False)
    if done.returncode != 0:
        tail = done.stderr.strip().splitlines()[-1:] or ["no message"]
        raise RuntimeError(f"the memory run failed: {tail[0]}")
    doc = json.loads(done.stdout.strip().splitlines()[-1])
    return MemoryResult(case=case, peak_bytes=int(doc["peak_bytes"]),
                        baseline_bytes=int(doc["baseline_bytes"]), method=doc["method"],
                        seconds=float(doc["seconds"]), n_windows=int(doc["n_windows"]),
                        converged=bool(doc["converged"]))


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


def _memory_child(states: int, items: int, occasions: int) -> dict:
    method, peak = _peak_reader()
    from models.estimate import fit  # imports count in the baseline

    baseline = peak()
    spec, diary = bench_diary(Case(states, items, occasions), p_missed=0.1)
    start = time.perf_counter()
    result = fit(diary, spec, FitOptions())
    return {"peak_bytes": int(peak()), "baseline_bytes": int(baseline), "method": method,
            "seconds": time.perf_counter() - start, "n_windows": result.n_windows,
            "converged": bool(result.converged)}


def run_benchmark(quick: bool = False, repeats: int | None = None, all_peers: bool = False,
                  memory: bool = True, semopy_threads: str = "1",
                  monitor: Monitor | None = None) -> BenchReport:
    """All measurements; `quick` uses the small case only and a 10,000-prompt memory run."""
    repeats = (1 if quick else 3) if repeats is None else repeats
    report = BenchReport(repeats=repeats, semopy_threads=semopy_threads)
    cases = QUICK_SPEED_CASES if quick else SPEED_CASES
    for n, case in enumerate(cases):
        checkpoint(monitor, n / (len(cases) + 1), f"Timing {case.label}")
        report.speed.append(measure_speed(case, repeats, True if all_peers else None,
                                          semopy_threads))
    if memory:
        checkpoint(monitor, len(cases) / (len(cases) + 1), "Peak memory of a long diary")
        report.memory = measure_memory(QUICK_MEMORY_CASE if quick else MEMORY_CASE)
    checkpoint(monitor, 1.0, "Done")
    return report


def _verdict(ok: bool) -> str:
    return "PASS" if ok else "MISS"


def format_report(report: BenchReport) -> str:
    """A plain-text table and the PASS/MISS lines against the targets."""
    threads = "one BLAS thread" if report.semopy_threads == "1" else "its default BLAS threads"
    lines = ["Lagwise benchmark"]
    head = f"{'diary':<34}{'fitted by':<38}{'seconds':>9}{'ratio':>8}{'max |dB|':>10}"
    verdicts = []
    if report.speed:
        lines += [f"Best of {report.repeats} run(s); seconds for estimates, standard errors "
                  f"and fit statistics;",
                  f"Lagwise on one BLAS thread, semopy on {threads}; ratio = seconds / "
                  f"Lagwise first-copy-free seconds;",
                  "max |dB| = largest difference from Lagwise's first-copy-free lagged paths.",
                  "", head, "-" * len(head)]
    for r in report.speed:
        lines.append(f"{r.case.label:<34}{'Lagwise, first-copy-free':<38}"
                     f"{r.lagwise_seconds:>9.3f}{'1.00':>8}{'':>10}")
        lines.append(f"{'':<34}{'Lagwise, stationary':<38}{r.stationary_seconds:>9.3f}"
                     f"{r.stationary_ratio:>8.2f}{'':>10}")
        for peer in r.peers:
            if peer.seconds is None:
                lines.append(f"{'':<34}{peer.name:<38}  {peer.note}")
                continue
            mark = "" if peer.converged else "  (did not converge)"
            lines.append(f"{'':<34}{peer.name:<38}{peer.seconds:>9.3f}{peer.ratio:>8.2f}"
                         f"{peer.max_path_difference:>10.1e}{mark}")
        lines.append(f"{'':<34}({r.n_windows} complete windows)")
        for peer in r.peers:
            if peer.ratio is not None:
                verdicts.append(f"{_verdict(peer.ratio >= SPEED_TARGET)}  {r.case.label}: "
                                f"{peer.name} takes {peer.ratio:.1f}x the Lagwise time "
                                f"(target at least {SPEED_TARGET:g}x)")
        verdicts.append(f"{_verdict(r.stationary_ratio <= STATIONARY_TARGET)}  {r.case.label}: "
                        f"stationary takes {r.stationary_ratio:.2f}x the first-copy-free time "
                        f"(target at most {STATIONARY_TARGET:g}x)")
    m = report.memory
    if m is not None:
        lines += ["", f"Peak memory, one default fit of {m.case.label} ({m.case.states * m.case.items} "
                      f"items, 10% missed prompts, {m.n_windows:,} windows): "
                      f"{m.peak_bytes / 2 ** 20:,.0f} MiB ({m.method}; "
                      f"{m.baseline_bytes / 2 ** 20:,.0f} MiB after imports), "
                      f"fit {m.seconds:.1f} s" + ("" if m.converged else ", did not converge")]
        verdicts.append(f"{_verdict(m.peak_bytes < MEMORY_TARGET_BYTES)}  {m.case.label}: peak "
                        f"memory {m.peak_bytes / 2 ** 30:.2f} GiB (target under 1 GiB)")
    lines += [""] + verdicts
    lines.append("The ratios compare runs in the same process on this machine; other work on "
                 "the machine moves them.")
    return "\n".join(lines)


def _main(argv: list[str]) -> int:
    """Entry point of the memory run (`python -m models.benchmark --memory-child k m T`)."""
    parser = argparse.ArgumentParser(prog="python -m models.benchmark")
    parser.add_argument("--memory-child", nargs=3, type=int, required=True,
                        metavar=("STATES", "ITEMS", "OCCASIONS"))
    args = parser.parse_args(argv)
    print(json.dumps(_memory_child(*args.memory_child)))
    return 0


if __name__ == "__main__":
    sys.exit(_main(sys.argv[1:]))
