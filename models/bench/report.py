"""The text of `lagwise bench`: tables of the measurements and PASS/MISS lines against the
targets (models.bench.cases). A MISS is reported, never raised: speed is not a test."""

from __future__ import annotations

from typing import TYPE_CHECKING

from lagwise.models.bench.cases import (
    CONTINUOUS_TARGET, EXACT_CASE, EXACT_GROWTH_TARGET, EXACT_SPEED_TARGET, HELP_TARGET, INSPECT_CASE,
    INSPECT_DEMO_TARGET, INSPECT_LONG_TARGET, MEMORY_TARGET_BYTES, READ_TARGET_RATIO,
    SCREEN_DEMO_TARGET,
    SPEED_TARGET, STATIONARY_TARGET,
)
from lagwise.models.bench.commandline import TESTS_CASE
from lagwise.models.bench.exact import ExactEvaluation, growth_exponent

if TYPE_CHECKING:
    from lagwise.models.bench import BenchReport
    from lagwise.models.bench.commandline import CommandTimes
    from lagwise.models.bench.memory import MemoryResult, ReadMemoryResult
    from lagwise.models.bench.refit import RefitResult
    from lagwise.models.bench.windows import SpeedResult


def _verdict(ok: bool) -> str:
    return "PASS" if ok else "MISS"


def format_report(report: BenchReport) -> str:
    """A plain-text table and the PASS/MISS lines against the targets."""
    lines = ["Lagwise benchmark"]
    verdicts: list[str] = []
    if report.speed:
        _speed_lines(report, lines, verdicts)
    if report.refit:
        lines.append("")
        _refit_lines(report.refit, lines)
    if report.memory is not None:
        lines.append("")
        _memory_lines(report.memory, lines, verdicts)
    if report.read_memory is not None:
        _read_memory_lines(report.read_memory, lines, verdicts)
    if (report.exact_speed is not None or report.exact_evaluations
            or report.exact_segment_evaluations or report.exact_memory
            or report.continuous_speed):
        lines += ["", "Exact estimator (Kalman filter)"]
        _exact_lines(report, lines, verdicts)
    if report.commands is not None:
        lines += ["", "Command line"]
        _command_lines(report.commands, report.repeats, lines, verdicts)
    lines += [""] + verdicts
    lines.append("The ratios compare runs in the same process on this machine; other work on "
                 "the machine moves them.")
    return "\n".join(lines)


def _speed_lines(report: BenchReport, lines: list[str], verdicts: list[str]) -> None:
    threads = "one BLAS thread" if report.semopy_threads == "1" else "its default BLAS threads"
    head = f"{'diary':<34}{'fitted by':<46}{'seconds':>9}{'ratio':>8}{'max |dB|':>10}"
    lines += [f"Best of {report.repeats} interleaved run(s) after one warm-up run each. Lagwise: "
              f"one whole fit (estimates, standard errors, fit indices);",
              "semopy Model: Model(text), fit(obj='MLW'), inspect() (estimates, standard "
              "errors); ModelMeans: fit(obj='ML'), inspect(), calc_stats();",
              f"Lagwise on one BLAS thread, semopy on {threads}; ratio = seconds / Lagwise "
              f"first-copy-free seconds;",
              "max |dB| = largest difference from Lagwise's first-copy-free lagged paths.",
              "", head, "-" * len(head)]
    for r in report.speed:
        _speed_rows(r, lines, verdicts)


def _speed_rows(r: SpeedResult, lines: list[str], verdicts: list[str]) -> None:
    lines.append(f"{r.case.label:<34}{'Lagwise, first-copy-free':<46}"
                 f"{r.lagwise_seconds:>9.3f}{'1.00':>8}{'':>10}")
    lines.append(f"{'':<34}{'Lagwise, stationary':<46}{r.stationary_seconds:>9.3f}"
                 f"{r.stationary_ratio:>8.2f}{'':>10}")
    for peer in r.peers:
        if peer.seconds is None:
            lines.append(f"{'':<34}{peer.name:<46}  {peer.note}")
            continue
        mark = "" if peer.converged else "  (did not converge)"
        lines.append(f"{'':<34}{peer.name:<46}{peer.seconds:>9.3f}{peer.ratio:>8.2f}"
                     f"{peer.max_path_difference:>10.1e}{mark}")
    lines.append(f"{'':<34}({r.n_windows} complete windows)")
    for peer in r.peers:
        if peer.ratio is not None and peer.target:
            verdicts.append(f"{_verdict(peer.ratio >= SPEED_TARGET)}  {r.case.label}: "
                            f"{peer.name} takes {peer.ratio:.1f}x the Lagwise first-copy-free "
                            f"time (target at least {SPEED_TARGET:g}x)")
    verdicts.append(f"{_verdict(r.stationary_ratio <= STATIONARY_TARGET)}  {r.case.label}: "
                    f"stationary takes {r.stationary_ratio:.2f}x the first-copy-free time "
                    f"(target at most {STATIONARY_TARGET:g}x)")


def _refit_lines(results: list[RefitResult], lines: list[str]) -> None:
    replicates = sorted({r.replicates for r in results})
    count = "/".join(str(n) for n in replicates)
    head = f"{'diary':<34}{'full s':>10}{'refit s':>10}{'speed-up':>10}{'max |d|/se':>13}"
    lines += ["Refit, default (stationary) estimator: a first full fit of the diary, then "
              f"{count} parametric-bootstrap diaries",
              "simulated from its estimates (seeds 1, 2, ...), each fitted in full (with "
              "standard errors) and refitted",
              "(standard_errors=False, start = the first fit); median seconds; max |d|/se = "
              "largest |refit - full| estimate",
              "difference in units of the full fit's standard errors.",
              "", head, "-" * len(head)]
    for r in results:
        mark = "" if r.converged else "  (a fit did not converge)"
        lines.append(f"{r.case.label:<34}{r.full_seconds:>10.3f}{r.refit_seconds:>10.3f}"
                     f"{r.speedup:>9.1f}x{r.max_difference_se:>13.1e}{mark}")


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


def _read_memory_lines(m: ReadMemoryResult, lines: list[str], verdicts: list[str]) -> None:
    lines.append(f"Peak memory, reading a diary file of {m.rows:,} prompts "
                 f"({m.file_bytes / 2 ** 20:,.0f} MiB, items named): "
                 f"{m.peak_bytes / 2 ** 20:,.0f} MiB ({m.baseline_bytes / 2 ** 20:,.0f} MiB after "
                 f"imports), {m.ratio:.1f}x the file, {m.seconds:.1f} s")
    verdicts.append(f"{_verdict(m.ratio < READ_TARGET_RATIO)}  reading {m.rows:,} prompts: "
                    f"{m.ratio:.1f}x the file's size (target under {READ_TARGET_RATIO:g}x)")


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
    c = report.continuous_speed
    if c is not None:
        lines += ["", f"Continuous time on the same model with prompts at random times "
                      f"({c.distinct_intervals} distinct intervals), against the exact estimator "
                      f"(best of {report.repeats}):",
                  f"{c.case.label:<42}{'Lagwise continuous-time':<38}{c.seconds:>9.3f}"
                  f"{c.ratio:>8.2f}" + ("" if c.converged else "  (did not converge)"),
                  f"{'':<42}{'Lagwise exact (equal spacing)':<38}{c.exact_seconds:>9.3f}{'1.00':>8}"
                  + ("" if c.exact_converged else "  (did not converge)")]
        verdicts.append(f"{_verdict(c.ratio <= CONTINUOUS_TARGET)}  continuous time, "
                        f"{c.case.label}: {c.ratio:.1f}x the exact time (target at most "
                        f"{CONTINUOUS_TARGET:g}x)")


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


def _command_lines(c: CommandTimes, repeats: int, lines: list[str], verdicts: list[str]) -> None:
    """Start-up and screening times against their absolute targets."""
    long = (f"lagwise inspect, {c.long_case.label} ({c.long_case.states * c.long_case.items} "
            f"items, {c.long_answered:,} answered)")
    rows = (("lagwise --help", c.help_seconds, HELP_TARGET),
            ("lagwise inspect DEMO", c.inspect_demo_seconds, INSPECT_DEMO_TARGET),
            ("reading and screening the demo, in process", c.screen_demo_seconds,
             SCREEN_DEMO_TARGET),
            (long, c.inspect_long_seconds, INSPECT_LONG_TARGET))
    head = f"{'what':<78}{'seconds':>9}{'target':>9}"
    lines += [f"Whole processes (python -m lagwise.desktop.cli), best of {repeats} after a "
              "warm-up run; the long diary once, written as CSV first (not timed);",
              "in process: best of the same runs, the screening's memory of series emptied "
              "before each.", "", head, "-" * len(head)]
    for what, seconds, target in rows:
        if what == long and c.long_case != INSPECT_CASE:  # the target is for a million prompts
            lines.append(f"{what:<78}{seconds:>9.3f}{'-':>9}")
            continue
        lines.append(f"{what:<78}{seconds:>9.3f}{target:>9g}")
        verdicts.append(f"{_verdict(seconds < target)}  {what}: {seconds:.2f} s "
                        f"(target under {target:g} s)")
    lines += ["", f"ADF and KPSS of the 9 items of {TESTS_CASE.label} (20% missed), best of "
              f"{repeats} interleaved runs, one BLAS thread:",
              f"  Lagwise (lags searched up to 24) {c.tests_seconds:.3f} s; statsmodels adfuller "
              f"(its default lag rule) + kpss {c.peer_tests_seconds:.3f} s: "
              f"{c.tests_ratio:.1f}x (reference, no target)"]
