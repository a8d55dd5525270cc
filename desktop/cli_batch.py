"""`lagwise batch DATA --person COL --state NAME=ITEM,... --out DIR`: one model per person.

DATA holds every person's rows stacked, column COL naming the person. Each person's rows
become a diary of their own (the time, item and missing-value options as for `lagwise fit`)
and the same model and estimator settings are fitted to each, in local worker processes
(--jobs) or on a running Dask cluster (--scheduler). DIR receives one file per person as it
finishes, then people.jsonl, summary.json, estimates.csv and estimates-wide.csv (models.batchfiles); a rerun
into the same DIR fits only the people still missing.

Exit codes: 0 every person fitted, 4 some were not (listed on stderr with the reason),
2 bad input (one line on stderr).
"""

from __future__ import annotations

import argparse
import sys

from lagwise.desktop.cli_common import add_diary_arguments, in_range, recipe_from_args
from lagwise.desktop.cli_fit import (
    StderrProgress, add_bootstrap_arguments, add_estimation_arguments, add_model_arguments,
    options_from_args, spec_from_args,
)
from lagwise.models.errors import SpecError
from lagwise.models.limits import JOBS

SOME_FAILED = 4


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_diary_arguments(parser)
    parser.add_argument("--person", metavar="COL", required=True,
                        help="column naming the person of each row (every person gets a "
                             "diary and a model of their own)")
    add_model_arguments(parser)
    add_estimation_arguments(parser)
    parser.add_argument("--lag2-check", action="store_true",
                        help="test for every person whether lag 1 is enough")
    boot = parser.add_argument_group("bootstrap")
    add_bootstrap_arguments(boot)
    where = parser.add_argument_group("where the people are fitted").add_mutually_exclusive_group()
    where.add_argument("--jobs", type=in_range(JOBS), metavar="N",
                       help="local worker processes, one person each at a time (default: "
                            "every core)")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="fit on a running Dask cluster instead, e.g. tcp://HOST:8786 "
                            "(started with 'dask scheduler' and 'dask worker ADDRESS')")
    parser.add_argument("--out", metavar="DIR", required=True,
                        help="folder for the results: one file per person, people.jsonl, "
                             "summary.json, estimates.csv, estimates-wide.csv (a rerun fits "
                             "only missing people)")


def run(args: argparse.Namespace) -> int:
    from lagwise.models.across import format_across
    from lagwise.models.batch import run_batch
    from lagwise.models.personfit import BatchSettings
    from lagwise.models.study import read_study

    if args.bootstrap is None and args.seed != 0:
        raise SpecError("--seed goes with --bootstrap N")
    spec = spec_from_args(args)
    if args.items is None:
        args.items = list(spec.items)
    settings = BatchSettings(spec, options_from_args(args), bootstrap=args.bootstrap,
                             seed=args.seed, lag2_check=args.lag2_check)
    study = read_study(args.data, recipe_from_args(args), args.person)
    outcome = run_batch(study, settings, args.out, jobs=args.jobs, scheduler=args.scheduler,
                        monitor=StderrProgress())
    fitted_now = len(study) - len(outcome.reused)
    print(f"Fitted {fitted_now} people; {len(outcome.reused)} were already done in {args.out}.")
    print()
    print(format_across(outcome.across))
    print(f"\nResults written to {args.out}")
    for person in outcome.not_fitted:
        print(f"lagwise: {person.person}: {person.status}: {person.reason}", file=sys.stderr)
    return SOME_FAILED if outcome.not_fitted else 0
