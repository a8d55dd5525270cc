"""`lagwise plan (PROJECT.lagwise | --model MODEL.json) --days 20,40,60 ...`: plan the next
diary by simulation (models.plan).

The assumed truth is the current result of a saved analysis or a model typed in as JSON
(models.plantruth). Each design (days x prompts, answered share and its pattern) is
simulated --replications times and refitted; the power, bias, SD and coverage of every
lagged path, their Monte Carlo errors and the days needed for 80% power are printed, and
written as JSON with --json.

Exit codes: 0 done, 2 bad input (one line on stderr).
"""

from __future__ import annotations

import argparse
import json

from lagwise.desktop.cli_common import in_range
from lagwise.models.errors import ProjectError, SpecError
from lagwise.models.estimators import ESTIMATORS, FitOptions
from lagwise.models.limits import JOBS, NIGHT_GAP, PROMPTS_PER_DAY, SEED



def add_arguments(parser: argparse.ArgumentParser) -> None:
    from lagwise.models.design import ANSWERED, PATTERNS   # light: no estimation code
    from lagwise.models.plan import REPLICATIONS

    truth = parser.add_argument_group("the assumed truth (one of)")
    truth.add_argument("project", nargs="?", metavar="PROJECT.lagwise",
                       help="a saved analysis: its current result is the truth")
    truth.add_argument("--run", metavar="NAME",
                       help="the run of PROJECT whose estimates are the truth (default: its "
                            "current run)")
    truth.add_argument("--model", metavar="MODEL.json",
                       help="a model typed in as JSON: states and items, inertia, "
                            "cross_lagged, innovation_correlation, loadings, reliability")
    design = parser.add_argument_group("the designs")
    design.add_argument("--days", required=True, metavar="N,N,...", type=_days,
                        help="days of each design to compare, e.g. 20,40,60")
    design.add_argument("--prompts", required=True, type=in_range(PROMPTS_PER_DAY),
                        metavar="N", help="prompts per day")
    design.add_argument("--answered", type=in_range(ANSWERED), default=0.75, metavar="SHARE",
                        help="expected share of prompts answered (default 0.75)")
    design.add_argument("--pattern", choices=PATTERNS, default="random",
                        help="which prompts are missed: 'random' (any alike) or 'late' "
                             "(more late in the day)")
    design.add_argument("--estimator", choices=ESTIMATORS, default=None,
                        help="estimator of the refits (default: the project's, with its night rule; "
                             "else stationary)")
    design.add_argument("--night-gap", type=in_range(NIGHT_GAP), metavar="N",
                        help="exact estimator: the states carry over N missed prompts of night")
    design.add_argument("--lag2", nargs=3, metavar=("FROM", "TO", "EFFECT"),
                        help="also plan the lag-2 check against this lag-2 effect")
    sim = parser.add_argument_group("the simulation")
    sim.add_argument("--replications", type=in_range(REPLICATIONS), default=200, metavar="R",
                     help="simulated diaries per design (default 200)")
    sim.add_argument("--seed", type=in_range(SEED), default=0, metavar="S",
                     help="seed of the simulation (same seed, same results)")
    where = sim.add_mutually_exclusive_group()
    where.add_argument("--jobs", type=in_range(JOBS), metavar="N",
                       help="local worker processes (default: every core)")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="run on a running Dask cluster instead, e.g. tcp://HOST:8786")
    parser.add_argument("--json", metavar="OUT", help="also write the results as JSON to OUT")


def run(args: argparse.Namespace) -> int:
    import numpy as np

    from lagwise.desktop.cli_fit import StderrProgress
    from lagwise.models.atomic import write_output
    from lagwise.models.design import Design
    from lagwise.models.plan import run_plan
    from lagwise.models.planresults import ALIGN, CAUTION, HEADER, table_rows
    from lagwise.models.texttable import table

    truth, options = _truth(args)
    if args.estimator is None:      # the analysis's own estimator and night rule
        args.estimator = options.estimator
        args.night_gap = options.night_gap if args.night_gap is None else args.night_gap
    designs = [Design(days, args.prompts, args.answered, args.pattern, args.estimator,
                      args.night_gap) for days in args.days]
    lag2 = None
    if args.lag2 is not None:
        names = list(truth.spec.state_names)
        fr, to, effect = args.lag2
        for name in (fr, to):
            if name not in names:
                raise SpecError(f"--lag2: the model has no state '{name}' "
                                f"(states: {', '.join(names)})")
        lag2 = np.zeros((len(names), len(names)))
        lag2[names.index(to), names.index(fr)] = _number(effect, "--lag2 EFFECT")
    plan = run_plan(truth, designs, replications=args.replications, seed=args.seed,
                    lag2=lag2, jobs=args.jobs, scheduler=args.scheduler,
                    monitor=StderrProgress())
    print("\n".join(table(HEADER, table_rows(plan), ALIGN, indent="")))
    print()
    for s in plan.designs:
        if s.lag2_power is not None:
            print(f"Lag-2 check, {s.design.words()}: power {s.lag2_power:.2f}.")
    print(f"{args.prompts} prompts a day, {round(100 * args.answered)}% answered "
          f"({args.pattern}); power, coverage and not converged are shares of diaries, "
          "± MC the Monte Carlo error of the power.")
    print("\n".join(plan.sentences()))
    print(CAUTION)
    if args.json:
        write_output(args.json, json.dumps(plan.to_json(), indent=2, allow_nan=False),
                     "the plan")
        print(f"Results written to {args.json}")
    return 0


def _truth(args: argparse.Namespace):
    from lagwise.models import jsonread, plantruth

    if (args.project is None) == (args.model is None):
        raise SpecError("give either PROJECT.lagwise or --model MODEL.json as the truth")
    if args.model is not None:
        if args.run is not None:
            raise SpecError("--run goes with PROJECT.lagwise")
        try:
            text = open(args.model, encoding="utf-8").read()
        except (OSError, UnicodeDecodeError) as error:
            raise SpecError(f"cannot read {args.model} ({error})") from None
        return plantruth.from_json(jsonread.parse(text)), FitOptions()
    from lagwise.models.project import open_project

    from lagwise.models.runs import find_run

    project = open_project(args.project)
    if args.run is None and project.result is None:
        raise ProjectError(f"{args.project} holds no results yet: fit the model first, or "
                           "give --model MODEL.json")
    result = project.result if args.run is None else find_run(project.runs, args.run).result
    return plantruth.from_result(result), result.options


def _days(text: str) -> list[int]:
    from lagwise.models.design import DAYS

    parse = in_range(DAYS)
    values = [parse(part.strip()) for part in text.split(",") if part.strip()]
    if not values:
        raise argparse.ArgumentTypeError("give the days of each design, e.g. 20,40,60")
    return sorted(set(values))


def _number(text: str, what: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise SpecError(f"{what} should be a number, not '{text}'") from None
    if not -1.0 < value < 1.0:
        raise SpecError(f"{what} should be between -1 and 1, not {text}")
    return value
