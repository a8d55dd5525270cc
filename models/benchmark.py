"""Speed and memory of the estimators, against semopy and statsmodels in the same process.

Window estimators: three measurements, each on a diary simulated here from a
known stationary model (k states x m items, 10 prompts a day, complete answers):
- speed: wall-clock seconds of `models.estimate.fit` with the first-copy-free estimator
  (windows, start values, optimisation, standard errors, fit indices) against semopy fitting
  the same first-copy-free window model on the same complete windows and giving the same
  outputs (model built from its text, data loaded, optimised, parameter table with standard
  errors, fit statistics) -> ratio semopy / Lagwise. Both run with BLAS on one thread (the
  Lagwise estimator always does; `semopy_threads="default"` leaves semopy's BLAS threads
  alone). The semopy peers: ModelMeans fitting the same model as Lagwise (item intercepts
  equal across copies, latent intercepts on the regressed copies: models.reference_sem,
  means="states"), where it finishes in reasonable time, which the 4x target applies to; and,
  for reference only, covariance-only ML (a simpler model whose window means are saturated,
  semopy's default objective). Each time is the best of `repeats` runs after
  an untimed warm-up run (common practice for benchmarks: the minimum is least disturbed by
  other work on the machine);
- the stationary estimator against the first-copy-free one on the same diary -> ratio;
- peak memory of one default fit (stationary, full information) of a long diary with missed
  prompts, in a fresh Python process so the peak is that run's alone: the peak resident set
  size where the platform reports it (Linux, macOS), else tracemalloc's peak.
Targets: Lagwise at least 4x faster than semopy; stationary within 1.5x of first-copy-free;
peak memory under 1 GB.

Exact estimator, on diaries of 3 states x 3 items with days of 8 prompts:
- speed: `fit(..., FitOptions(estimator="exact"))` (window start, optimisation, standard
  errors, state scores) on T = 1,000 complete prompts against statsmodels' DynamicFactor
  fitting the one-factor model (one factor, AR(1), a constant per item) to the same data at
  its defaults (L-BFGS with at most 50 iterations; standard errors from the outer product of
  gradients, cheaper than the observed information Lagwise computes), both on one BLAS
  thread -> ratio statsmodels / Lagwise, with both log-likelihoods. The two are different
  models (three states restarting each day; one factor over one unbroken series), so the
  log-likelihoods are reported, not compared; what is checked is that Lagwise's filter at
  statsmodels' estimate gives statsmodels' log-likelihood (the same filter, like for like).
  statsmodels' fit takes about 20 s here, so its runs get no warm-up run;
- evaluation cost: one log-likelihood and one gradient at T = 1,000, 10,000 and 100,000
  prompts (10% missed), the time per occasion and the growth exponent of the gradient time
  between the two largest diaries, log(t_b / t_a) / log(T_b / T_a) (1 = linear), for days of
  8 prompts and for the same diaries as one segment (row order: the states carry over every
  night, so the filter never restarts);
- peak memory of one exact fit of T = 100,000 prompts (10% missed), in a fresh process.
Targets: statsmodels takes at least 5x the Lagwise time; growth exponent at most 1.1 on both
layouts; peak memory under 1 GB. These are reported as PASS/MISS lines, never as timed tests.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
import warnings
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from lagwise.models.diary import Diary
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.estimators import FitOptions
from lagwise.models.spec import ModelSpec, make_spec

PROMPTS_PER_DAY = 10
SPEED_TARGET = 4.0
STATIONARY_TARGET = 1.5
MEMORY_TARGET_BYTES = 1024 ** 3
# ModelMeans works on the raw rows at every step (its gradient loops over the parameters
# with row-sized products): one fit of the 6 x 5, T = 2,000 diary took about 2 minutes on a
# 2-core machine, so above this many occasions it runs only when asked
MEANS_PEER_LIMIT = 500
EXACT_SPEED_TARGET = 5.0
EXACT_GROWTH_TARGET = 1.1


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


SPEED_CASES = (Case(3, 4, 200), Case(6, 5, 2000))
QUICK_SPEED_CASES = (Case(3, 4, 200),)
MEMORY_CASE = Case(6, 5, 100_000)
QUICK_MEMORY_CASE = Case(6, 5, 10_000)
EXACT_CASE = Case(3, 3, 1000, prompts=8)
QUICK_EXACT_CASE = Case(3, 3, 400, prompts=8)
EXACT_SIZES = (1_000, 10_000, 100_000)
QUICK_EXACT_SIZES = (1_000, 10_000)
EXACT_MEMORY_CASE = Case(3, 3, 100_000, prompts=8)
QUICK_EXACT_MEMORY_CASE = Case(3, 3, 10_000, prompts=8)


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
    from lagwise.models.simulate import simulate_diary

    spec, truth = bench_model(case.states, case.items)
    days = max(1, case.occasions // case.prompts)
    diary = simulate_diary(spec, days=days, prompts_per_day=case.prompts, p_missed=p_missed,
                           seed=seed, **truth)
    return spec, diary


def _best_time(run, repeats: int, warm_up: bool = True):
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


@dataclass(frozen=True)
class PeerTime:
    """One semopy peer: its label, best seconds (None when not run) and agreement."""

    name: str
    seconds: float | None
    ratio: float | None            # semopy seconds / Lagwise first-copy-free seconds
    max_path_difference: float | None
    converged: bool | None
    note: str = ""
    same_model: bool = True        # the speed target applies to the peer fitting the same model


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
    n_windows: int          # windows, or answered occasions for the exact estimator
    converged: bool
    estimator: str = "stationary"


@dataclass(frozen=True)
class ExactSpeedResult:
    """Lagwise's exact fit against statsmodels' one-factor DynamicFactor on one diary."""

    case: Case
    lagwise_seconds: float
    lagwise_loglik: float
    lagwise_converged: bool
    lagwise_iterations: int
    peer_seconds: float
    peer_loglik: float
    peer_converged: bool
    peer_iterations: int
    peer_check: float      # |Lagwise's filter at statsmodels' estimate - statsmodels' llf|

    @property
    def ratio(self) -> float:
        return self.peer_seconds / self.lagwise_seconds


@dataclass(frozen=True)
class ExactEvaluation:
    """Best seconds of one exact log-likelihood and of one gradient on a diary of T prompts."""

    occasions: int
    loglik_seconds: float
    gradient_seconds: float
    loglik: float


def growth_exponent(evaluations: list[ExactEvaluation]) -> float | None:
    """log(t_b / t_a) / log(T_b / T_a) of the gradient time between the two largest diaries
    (1 = linear; at the smallest, fixed costs per call still weigh)."""
    if len(evaluations) < 2:
        return None
    first, last = evaluations[-2], evaluations[-1]
    return float(np.log(last.gradient_seconds / first.gradient_seconds)
                 / np.log(last.occasions / first.occasions))


@dataclass
class BenchReport:
    speed: list[SpeedResult] = field(default_factory=list)
    memory: MemoryResult | None = None
    repeats: int = 1
    semopy_threads: str = "1"
    exact_speed: ExactSpeedResult | None = None
    exact_evaluations: list[ExactEvaluation] = field(default_factory=list)
    exact_segment_evaluations: list[ExactEvaluation] = field(default_factory=list)  # one segment
    exact_memory: MemoryResult | None = None


def measure_speed(case: Case, repeats: int = 3, means_peer: bool | None = None,
                  semopy_threads: str = "1", monitor: Monitor | None = None) -> SpeedResult:
    """Time Lagwise (both window estimators) and the semopy peers on one case."""
    from lagwise.models import reference_sem
    from lagwise.models.estimate import fit
    from lagwise.models.windows import lag_windows

    spec, diary = bench_diary(case)
    checkpoint(monitor, 0.0, f"{case.label}: Lagwise first-copy-free")
    fcf_s, fcf = _best_time(lambda: fit(diary, spec, FitOptions(estimator="first-copy-free")),
                            repeats)
    checkpoint(monitor, 0.2, f"{case.label}: Lagwise stationary")
    st_s, st = _best_time(lambda: fit(diary, spec, FitOptions(estimator="stationary")), repeats)
    windows = lag_windows(diary, 1)
    peers = []
    run_means = case.occasions <= MEANS_PEER_LIMIT if means_peer is None else means_peer
    for means, name in (("free", "semopy, covariance only (simpler model)"),
                        ("states", "semopy, the same model (ML)")):
        if means == "states" and not run_means:
            peers.append(PeerTime(name, None, None, None, None,
                                  "not run: minutes per fit here (--all-peers runs it)"))
            continue
        checkpoint(monitor, 0.4 if means == "free" else 0.7, f"{case.label}: {name}")
        sec, ref = _best_time(lambda: reference_sem.fit_windows(
            windows, spec, means=means, precise=False, report=True,
            single_thread=semopy_threads == "1"), repeats)
        diff = float(np.max(np.abs(ref.lagged[0] - fcf.lagged[0])))
        peers.append(PeerTime(name, sec, sec / fcf_s, diff, ref.converged,
                              same_model=means == "states"))
    return SpeedResult(case=case, n_windows=fcf.n_windows, lagwise_seconds=fcf_s,
                       lagwise_converged=fcf.converged, stationary_seconds=st_s,
                       stationary_converged=st.converged, peers=tuple(peers))


def _one_factor_peer(values: np.ndarray):
    """statsmodels' DynamicFactor, one factor with AR(1) and a constant per item, fitted at its
    defaults; its standard errors are computed inside the timed run."""
    from statsmodels.tsa.statespace.dynamic_factor import DynamicFactor
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1, user_api="blas"), warnings.catch_warnings():
        warnings.simplefilter("ignore")   # its convergence warning is reported below instead
        model = DynamicFactor(values, k_factors=1, factor_order=1,
                              exog=np.ones((values.shape[0], 1)))
        result = model.fit(disp=False)
        result.bse
    return result


def measure_exact_speed(case: Case = EXACT_CASE, repeats: int = 3,
                        monitor: Monitor | None = None) -> ExactSpeedResult:
    """Time the Lagwise exact fit and statsmodels' one-factor DynamicFactor on one diary."""
    from lagwise.models.estimate import fit
    from lagwise.models.kalman import kalman_loglik

    spec, diary = bench_diary(case)
    checkpoint(monitor, 0.0, f"{case.label}: Lagwise exact")
    lag_s, res = _best_time(lambda: fit(diary, spec, FitOptions(estimator="exact")), repeats)
    checkpoint(monitor, 0.2, f"{case.label}: statsmodels DynamicFactor (about 20 s a run)")
    peer_s, peer = _best_time(lambda: _one_factor_peer(diary.values), repeats, warm_up=False)
    p = diary.values.shape[1]
    prm = np.asarray(peer.params)  # loadings, constants, unique variances, AR coefficient
    ours = kalman_loglik(diary.values, np.zeros(diary.n_occasions), prm[p:2 * p],
                         prm[:p].reshape(p, 1), prm[2 * p:3 * p], [prm[3 * p:].reshape(1, 1)],
                         np.eye(1))
    return ExactSpeedResult(
        case=case, lagwise_seconds=lag_s, lagwise_loglik=float(res.fit.loglik),
        lagwise_converged=bool(res.converged), lagwise_iterations=int(res.iterations),
        peer_seconds=peer_s, peer_loglik=float(peer.llf),
        peer_converged=bool(peer.mle_retvals.get("converged", False)),
        peer_iterations=int(peer.mle_retvals.get("iterations", -1)),
        peer_check=abs(ours - float(peer.llf)))


def measure_exact_evaluation(sizes: tuple[int, ...] = EXACT_SIZES, repeats: int = 3,
                             monitor: Monitor | None = None, one_segment: bool = False
                             ) -> list[ExactEvaluation]:
    """Best seconds of the exact log-likelihood and of its gradient at the true parameters, on
    diaries of 3 states x 3 items, days of 8 prompts, 10% missed, of each size; with
    `one_segment`, the same diaries as one segment (row order)."""
    from threadpoolctl import threadpool_limits

    from lagwise.models.exact import ExactObjective
    from lagwise.models.parameters import Matrices

    out = []
    for n, occasions in enumerate(sizes):
        checkpoint(monitor, n / len(sizes), f"Exact evaluation, T = {occasions:,}"
                   + (", one segment" if one_segment else ""))
        case = Case(EXACT_CASE.states, EXACT_CASE.items, occasions, EXACT_CASE.prompts)
        spec, diary = bench_diary(case, p_missed=0.1)
        if one_segment:
            diary = replace(diary, segment=np.zeros(diary.n_occasions, dtype=int))
        _, truth = bench_model(case.states, case.items)
        objective = ExactObjective(diary, spec, FitOptions(estimator="exact"))
        p = len(spec.items)
        theta = objective.layout.pack(Matrices(
            nu=truth["intercepts"], lam=truth["loadings"], theta=truth["unique"], d=np.zeros(p),
            lagged=np.array(truth["lagged"]), psi=truth["innovation"]))
        runs = max(repeats, 5)   # cheap, and the growth exponent needs steady minima
        with threadpool_limits(limits=1, user_api="blas"):  # as in every Lagwise fit
            ll_s, ll = _best_time(lambda: objective.loglik(theta), runs)
            grad_s, _ = _best_time(lambda: objective.loglik_and_gradient(theta), runs)
        out.append(ExactEvaluation(occasions=diary.n_occasions, loglik_seconds=ll_s,
                                   gradient_seconds=grad_s, loglik=float(ll)))
    return out


def measure_memory(case: Case, timeout: float = 3600.0, estimator: str = "stationary"
                   ) -> MemoryResult:
    """Peak memory of one fit of `case` (10% missed prompts) in a fresh process, with the
    default (stationary, full-information) or the exact estimator."""
    cmd = [sys.executable, "-m", "lagwise.models.benchmark", "--memory-child", str(case.states),
           str(case.items), str(case.occasions), "--prompts", str(case.prompts),
           "--estimator", estimator]
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


def run_benchmark(quick: bool = False, repeats: int | None = None, all_peers: bool = False,
                  memory: bool = True, semopy_threads: str = "1", windows: bool = True,
                  exact: bool = True, monitor: Monitor | None = None) -> BenchReport:
    """All measurements; `quick` uses the small cases only and 10,000-prompt memory runs;
    `windows` / `exact` choose the sections (window estimators against semopy; the exact
    estimator against statsmodels)."""
    repeats = (1 if quick else 3) if repeats is None else repeats
    report = BenchReport(repeats=repeats, semopy_threads=semopy_threads)
    cases = (QUICK_SPEED_CASES if quick else SPEED_CASES) if windows else ()
    parts = len(cases) + int(windows and memory) + (3 + int(memory) if exact else 0)
    done = 0
    for case in cases:
        checkpoint(monitor, done / parts, f"Timing {case.label}")
        report.speed.append(measure_speed(case, repeats, True if all_peers else None,
                                          semopy_threads))
        done += 1
    if windows and memory:
        checkpoint(monitor, done / parts, "Peak memory of a long diary")
        report.memory = measure_memory(QUICK_MEMORY_CASE if quick else MEMORY_CASE)
        done += 1
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
            if peer.ratio is not None and peer.same_model:
                verdicts.append(f"{_verdict(peer.ratio >= SPEED_TARGET)}  {r.case.label}: "
                                f"{peer.name} takes {peer.ratio:.1f}x the Lagwise time "
                                f"(target at least {SPEED_TARGET:g}x)")
        verdicts.append(f"{_verdict(r.stationary_ratio <= STATIONARY_TARGET)}  {r.case.label}: "
                        f"stationary takes {r.stationary_ratio:.2f}x the first-copy-free time "
                        f"(target at most {STATIONARY_TARGET:g}x)")
    if report.memory is not None:
        lines.append("")
        _memory_lines(report.memory, lines, verdicts)
    if (report.exact_speed is not None or report.exact_evaluations
            or report.exact_segment_evaluations or report.exact_memory):
        lines += ["", "Exact estimator (Kalman filter)"]
        _exact_lines(report, lines, verdicts)
    lines += [""] + verdicts
    lines.append("The ratios compare runs in the same process on this machine; other work on "
                 "the machine moves them.")
    return "\n".join(lines)


def _memory_lines(m: MemoryResult, lines: list[str], verdicts: list[str]) -> None:
    exact = m.estimator == "exact"
    what = (f"{m.n_windows:,} answered prompts" if exact else f"{m.n_windows:,} windows")
    lines.append(f"Peak memory, one {'exact' if exact else 'default'} fit of {m.case.label} "
                 f"({m.case.states * m.case.items} items, 10% missed prompts, {what}): "
                 f"{m.peak_bytes / 2 ** 20:,.0f} MiB ({m.method}; "
                 f"{m.baseline_bytes / 2 ** 20:,.0f} MiB after imports), "
                 f"fit {m.seconds:.1f} s" + ("" if m.converged else ", did not converge"))
    verdicts.append(f"{_verdict(m.peak_bytes < MEMORY_TARGET_BYTES)}  "
                    f"{'exact, ' if exact else ''}{m.case.label}: peak "
                    f"memory {m.peak_bytes / 2 ** 30:.2f} GiB (target under 1 GiB)")


def _exact_lines(report: BenchReport, lines: list[str], verdicts: list[str]) -> None:
    r = report.exact_speed
    if r is not None:
        head = f"{'diary':<42}{'fitted by':<38}{'seconds':>9}{'ratio':>8}{'log-lik':>13}"
        lines += [f"Lagwise best of {report.repeats} run(s) (window start, optimisation, standard "
                  f"errors, state scores); statsmodels best of {report.repeats}, no warm-up;",
                  "statsmodels at its defaults (L-BFGS, at most 50 iterations, standard errors "
                  "from the outer product of gradients); both on one BLAS thread;",
                  "ratio = seconds / Lagwise seconds. The log-likelihoods belong to different "
                  "models (3 states, each day restarting; one factor, one unbroken series).",
                  "", head, "-" * len(head)]
        lines.append(f"{r.case.label:<42}{'Lagwise exact, 3 states':<38}{r.lagwise_seconds:>9.3f}"
                     f"{'1.00':>8}{r.lagwise_loglik:>13.2f}"
                     + ("" if r.lagwise_converged else "  (did not converge)"))
        peer_note = ("" if r.peer_converged
                     else f"  (did not converge in {r.peer_iterations} iterations)")
        lines.append(f"{'':<42}{'statsmodels DynamicFactor, 1 factor':<38}{r.peer_seconds:>9.3f}"
                     f"{r.ratio:>8.2f}{r.peer_loglik:>13.2f}{peer_note}")
        lines.append(f"{'':<42}(Lagwise's filter at statsmodels' estimate differs from its "
                     f"log-likelihood by {r.peer_check:.1e})")
        verdicts.append(f"{_verdict(r.ratio >= EXACT_SPEED_TARGET)}  exact, {r.case.label}: "
                        f"statsmodels DynamicFactor (one factor) takes {r.ratio:.1f}x the Lagwise "
                        f"exact time (target at least {EXACT_SPEED_TARGET:g}x)")
    days = f"days of {EXACT_CASE.prompts}"
    layouts = ((report.exact_evaluations, days, days),
               (report.exact_segment_evaluations, "the same diaries as one segment (row order)",
                "one segment"))
    for evals, layout, short in layouts:
        if evals:
            _evaluation_lines(evals, layout, short, max(report.repeats, 5), lines, verdicts)
    if report.exact_memory is not None:
        lines.append("")
        _memory_lines(report.exact_memory, lines, verdicts)


def _evaluation_lines(evals: list[ExactEvaluation], layout: str, short: str, runs: int,
                      lines: list[str], verdicts: list[str]) -> None:
    """The evaluation costs on one layout of the diaries, and the verdict on their growth."""
    head = (f"{'prompts T':>12}{'log-lik ms':>13}{'gradient ms':>13}"
            f"{'us/prompt, log-lik':>21}{'us/prompt, gradient':>22}")
    lines += ["", f"Exact evaluation cost, {EXACT_CASE.states} states x {EXACT_CASE.items} "
                  f"items, {layout}, 10% missed prompts (best of {runs}, after a warm-up call):",
              head, "-" * len(head)]
    for e in evals:
        lines.append(f"{e.occasions:>12,}{e.loglik_seconds * 1e3:>13.2f}"
                     f"{e.gradient_seconds * 1e3:>13.2f}"
                     f"{e.loglik_seconds / e.occasions * 1e6:>21.2f}"
                     f"{e.gradient_seconds / e.occasions * 1e6:>22.2f}")
    b = growth_exponent(evals)
    if b is not None:
        lines.append(f"gradient time grows as T^{b:.2f} between the two largest diaries "
                     "(1 = linear)")
        verdicts.append(f"{_verdict(b <= EXACT_GROWTH_TARGET)}  exact evaluation, {short}: the "
                        f"gradient time grows as T^{b:.2f} from T = {evals[-2].occasions:,} to "
                        f"{evals[-1].occasions:,} (target: linear, exponent at most "
                        f"{EXACT_GROWTH_TARGET:g})")


def _main(argv: list[str]) -> int:
    """Entry point of the memory run (`python -m models.benchmark --memory-child k m T`)."""
    parser = argparse.ArgumentParser(prog="python -m models.benchmark")
    parser.add_argument("--memory-child", nargs=3, type=int, required=True,
                        metavar=("STATES", "ITEMS", "OCCASIONS"))
    parser.add_argument("--prompts", type=int, default=PROMPTS_PER_DAY)
    parser.add_argument("--estimator", default="stationary")
    args = parser.parse_args(argv)
    print(json.dumps(_memory_child(*args.memory_child, prompts=args.prompts,
                                   estimator=args.estimator)))
    return 0


if __name__ == "__main__":
    sys.exit(_main(sys.argv[1:]))
