"""`lagwise bench [--quick] [--repeats N] [--all-peers] [--semopy-threads 1|default]
[--no-memory] [--exact-only | --no-exact | --commands-only]`: speed and memory of the window
estimators against semopy, the refit against a full fit, the exact estimator against
statsmodels on simulated diaries, and the command line's start-up and screening
(models.bench), printed as tables with PASS/MISS lines for the targets. Always exits
0: a benchmark reports, it does not fail.
"""

from __future__ import annotations

import argparse
import sys

from lagwise.models.bench import format_report, run_benchmark


class _Progress:
    """Progress lines on stderr, so the table on stdout stays clean."""

    def report(self, fraction: float, message: str) -> None:
        print(f"[{fraction:4.0%}] {message}", file=sys.stderr, flush=True)

    def cancelled(self) -> bool:
        return False


def _positive(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError("must be at least 1")
    return value


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--quick", action="store_true",
                        help="only the small diaries, one run each, 3 refit replicates and "
                             "10,000-prompt memory runs")
    parser.add_argument("--repeats", type=_positive, metavar="N",
                        help="runs per timing, the best kept (default 3, or 1 with --quick)")
    parser.add_argument("--all-peers", action="store_true",
                        help="also time semopy with item intercepts on the large diary (slow)")
    parser.add_argument("--semopy-threads", choices=("1", "default"), default="1",
                        help="BLAS threads for semopy: 1 like Lagwise (default), or its default")
    parser.add_argument("--no-memory", action="store_true",
                        help="skip the peak-memory runs")
    sections = parser.add_mutually_exclusive_group()
    sections.add_argument("--exact-only", action="store_true",
                          help="only the exact estimator against statsmodels")
    sections.add_argument("--no-exact", action="store_true",
                          help="only the window estimators against semopy, and the refit")
    sections.add_argument("--commands-only", action="store_true",
                          help="only the command line's start-up and screening times")


def run(args: argparse.Namespace) -> int:
    report = run_benchmark(quick=args.quick, repeats=args.repeats, all_peers=args.all_peers,
                           memory=not args.no_memory, semopy_threads=args.semopy_threads,
                           windows=not (args.exact_only or args.commands_only),
                           exact=not (args.no_exact or args.commands_only),
                           commands=not (args.exact_only or args.no_exact),
                           monitor=_Progress())
    print(format_report(report))
    return 0
