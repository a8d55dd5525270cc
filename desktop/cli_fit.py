"""`lagwise fit DATA --state NAME=ITEM,ITEM ... [options]`: estimate and report a model.

`lagwise fit PROJECT.lagwise` refits a saved project with its stored data, model and
estimator settings (for reproducibility); `--save PROJECT.lagwise` writes the data, the model,
the settings and the result as a project file (models.project), the run keeping the lag-2
check and the bootstrap of the same command.

Exit codes: 0 success, 2 bad input (one line on stderr), 3 the optimiser did not converge
(the report and JSON are still written, flagged). --json and --save are written
independently: when one cannot be written the other still is, both outcomes are reported
and the exit code is 2.
"""

from __future__ import annotations

import argparse
import json
import sys
from dataclasses import replace

from lagwise.desktop.cli_common import (
    add_diary_arguments, diary_from_args, in_range, recipe_from_args,
)
from lagwise.models.atomic import write_output
from lagwise.models.errors import LagwiseError, ProjectError, SpecError
from lagwise.models.estimate import fit
from lagwise.models.lag2check import Lag2Check, lag2_check
from lagwise.models.parallel import scheduler_address
from lagwise.models.project import (
    Project, embed_file, is_project_file, open_project, project_diary, save_project,
    with_estimate,
)
from lagwise.models.bootstrap import MAX_REPLICATES, Bootstrap, bootstrap
from lagwise.models.report import format_bootstrap, format_lag2, format_responses, format_result
from lagwise.models.responses import DEFAULT_HORIZON, MAX_HORIZON, check_horizon, impulse_responses
from lagwise.models.fitdocument import fit_document
from lagwise.models.estimators import ERRORS, ESTIMATORS, INTERVAL_UNITS, MISSING, NIGHTS, FitOptions
from lagwise.models.limits import DEPTH, JOBS, MAX_ITER, NIGHT_GAP, PROMPT_SPACING, SEED, Limit
from lagwise.models.runs import tests_result, update_run
from lagwise.models.spec import ModelSpec, State, full_mask, inertia_mask


HORIZON = Limit("horizon", 1, MAX_HORIZON, "prompts")
REPLICATES = Limit("number of bootstrap replicates", 1, MAX_REPLICATES)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_diary_arguments(parser)
    add_model_arguments(parser)
    add_estimation_arguments(parser)
    parser.add_argument("--lag2-check", action="store_true",
                        help="test whether lag 1 is enough (lag-2 paths and autocorrelated unique parts)")
    parser.add_argument("--horizon", type=in_range(HORIZON), default=DEFAULT_HORIZON, metavar="H",
                        help=f"impulse responses over H prompts (1 to {MAX_HORIZON}, default 10): "
                             "printed, and written to the JSON as \"responses\"")
    boot = parser.add_argument_group("bootstrap")
    add_bootstrap_arguments(boot)
    where = boot.add_mutually_exclusive_group()
    where.add_argument("--jobs", type=in_range(JOBS), metavar="J",
                       help="worker processes for the bootstrap (default: every core)")
    where.add_argument("--scheduler", metavar="ADDRESS",
                       help="run the bootstrap on a running Dask cluster instead, "
                            "e.g. tcp://HOST:8786")
    parser.add_argument("--json", metavar="OUT", help="write the result as JSON to OUT")
    parser.add_argument("--save", metavar="PROJECT.lagwise",
                        help="also save the data, model, settings and result (with the "
                             "lag-2 check and bootstrap asked for) as a project file")
    parser.epilog = ("DATA may be a saved project (PROJECT.lagwise): it is refitted with its "
                     "own data, model and estimator settings; only --json, --save, "
                     "--lag2-check, --horizon and the bootstrap options may be added.")


def add_model_arguments(parser: argparse.ArgumentParser) -> None:
    """The model options (--state, --lags, --paths, ...), read by `spec_from_args`."""
    model = parser.add_argument_group("model")
    model.add_argument("--state", action="append", metavar="NAME=ITEM,ITEM,...",
                       help="a latent state and its items (repeat for each state; the first "
                            "item is the marker); quote it when a name holds spaces, and write "
                            "NAME=@FILE to read the items from FILE, one per line (for item "
                            "names holding a comma)")
    model.add_argument("--lags", type=int, choices=(1, 2), default=1, help="lag order (default 1)")
    model.add_argument("--paths", choices=("all", "inertia"), default="all",
                       help="free lagged paths: all (default) or inertia only")
    model.add_argument("--path", action="append", metavar="FROM->TO",
                       help="with --paths inertia: also free the lag-1 effect of state FROM on "
                            "state TO (repeat for each path; quote names with spaces)")
    model.add_argument("--innovations", choices=("free", "independent", "partial"), default="free",
                       help="innovation covariances: free (default), independent, or partial correlations")
    model.add_argument("--identification", choices=("marker", "variance"), default="marker",
                       help="scale of each state: marker loading 1 (default) or innovation variance 1")


def add_estimation_arguments(parser: argparse.ArgumentParser) -> None:
    """The estimator options (--estimator, --missing, ...), read by `options_from_args`."""
    est = parser.add_argument_group("estimation")
    est.add_argument("--estimator", choices=ESTIMATORS, default="stationary",
                     help="stationary: lag windows, one stable process (default, fast); "
                          "first-copy-free: lag windows, no stable process assumed; "
                          "exact: Kalman filter over the whole series (exact likelihood, "
                          "state scores); continuous-time: drift and diffusion of states that "
                          "change continuously, for prompts at unequal intervals (needs --time "
                          "COL or --prompt-spacing)")
    est.add_argument("--missing", choices=MISSING, default="fiml",
                     help="missed prompts and skipped items: fiml uses every answer "
                          "(full information, default); listwise keeps complete lag "
                          "windows only")
    est.add_argument("--se", choices=tuple(ERRORS),
                     help="standard errors: robust (sandwich; the default for lag windows) or "
                          "model (inverse information; the exact estimator's)")
    est.add_argument("--depth", type=in_range(DEPTH),
                     help="lag windows of DEPTH + 1 prompts: a window of N prompts has depth "
                          "N - 1 (default: the lag order, a window of 2 prompts for lag 1)")
    est.add_argument("--night-gap", type=in_range(NIGHT_GAP), metavar="N",
                     help="exact estimator: join the days with N missed prompts between them "
                          "instead of restarting each day")
    est.add_argument("--interval-unit", choices=tuple(INTERVAL_UNITS),
                     help="continuous-time estimator: the time unit of the drift and of the "
                          "intervals (default hours)")
    est.add_argument("--night", choices=NIGHTS,
                     help="continuous-time estimator: restart the states each day (default) or "
                          "carry them over the real night length (needs --time COL)")
    est.add_argument("--prompt-spacing", type=in_range(PROMPT_SPACING), metavar="X",
                     help="continuous-time estimator with --day/--prompt: prompts are X "
                          "interval units apart (e.g. 1.5 with --interval-unit hours)")
    est.add_argument("--max-iter", type=in_range(MAX_ITER), default=FitOptions.max_iter,
                     metavar="N",
                     help=f"optimiser iterations at most (default {FitOptions.max_iter})")


def add_bootstrap_arguments(group) -> None:
    """--bootstrap N and --seed S (the caller adds what runs the replicates)."""
    group.add_argument("--bootstrap", type=in_range(REPLICATES), metavar="N",
                       help="check the stability of the estimates with N bootstrap replicates "
                            "(resampled days, or stationary blocks when days are joined)")
    group.add_argument("--seed", type=in_range(SEED), default=0, metavar="S",
                       help="seed of the bootstrap (default 0): the same seed, the same answer")


PROJECT_RUN_OPTIONS = ("data", "json", "save", "lag2_check", "horizon", "bootstrap", "seed", "jobs",
                       "scheduler")


def parse_states(texts: list[str] | None) -> tuple[State, ...]:
    """States of the --state options: NAME=ITEM,ITEM,... or NAME=@FILE (one item a line)."""
    if not texts:
        raise SpecError("give at least one --state NAME=ITEM,ITEM,...")
    states = []
    for text in texts:
        name, sep, items = text.partition("=")
        if not sep or not name.strip():
            raise SpecError(f"--state '{text}' is not NAME=ITEM,ITEM,... or NAME=@FILE")
        if items.startswith("@"):
            parts = _item_file(items[1:], name.strip())
        else:
            parts = tuple(i.strip() for i in items.split(",") if i.strip())
        if not parts:
            raise SpecError(f"--state '{name.strip()}' lists no items")
        states.append(State(name.strip(), parts))
    return tuple(states)


def _item_file(path: str, state: str) -> tuple[str, ...]:
    """The item names in `path`, one a line (blank lines skipped)."""
    try:
        with open(path, encoding="utf-8-sig") as handle:
            text = handle.read(1 << 20)
    except (OSError, UnicodeDecodeError) as error:
        detail = getattr(error, "strerror", None) or "not UTF-8 text"
        raise SpecError(f"--state {state}=@{path}: cannot read the file ({detail})") from None
    return tuple(line.strip() for line in text.splitlines() if line.strip())


def spec_from_args(args: argparse.Namespace) -> ModelSpec:
    states = parse_states(args.state)
    k = len(states)
    mask = full_mask(k) if args.paths == "all" else inertia_mask(k)
    if args.path:
        if args.paths == "all":
            raise SpecError("--path frees single paths: give it with --paths inertia")
        mask = _with_paths(mask, [s.name for s in states], args.path)
    masks = tuple(mask if lag == 1 else (full_mask(k) if args.paths == "all" else full_mask(k, False))
                  for lag in range(1, args.lags + 1))
    return ModelSpec(states=states, lags=args.lags, paths=masks, innovations=args.innovations,
                     identification=args.identification)


def options_from_args(args: argparse.Namespace) -> FitOptions:
    """The estimator settings of the estimation options."""
    return FitOptions(estimator=args.estimator, missing=args.missing, depth=args.depth,
                      night_gap=args.night_gap, max_iter=args.max_iter, se=args.se,
                      interval_unit=args.interval_unit, night=args.night,
                      prompt_spacing=args.prompt_spacing)


def _with_paths(mask, names: list[str], texts: list[str]):
    """`mask` with the lag-1 path of every --path FROM->TO freed (row TO, column FROM)."""
    mask = [list(row) for row in mask]
    for text in texts:
        source, sep, target = (part.strip() for part in text.partition("->"))
        if not sep or source not in names or target not in names:
            raise SpecError(f"--path '{text}' is not FROM->TO with two of the states "
                            f"{', '.join(names)}")
        mask[names.index(target)][names.index(source)] = True
    return tuple(tuple(row) for row in mask)


def run(args: argparse.Namespace) -> int:
    check_bootstrap_arguments(args)
    if args.save is not None and not is_project_file(args.save):
        raise ProjectError(f"--save {args.save}: a project file name ends in .lagwise")
    check_horizon(args.horizon)
    project: Project | None = None
    if is_project_file(args.data):
        project = project_to_refit(args)
        diary, spec, options = project_diary(project), project.spec, project.options
    else:
        spec = spec_from_args(args)
        if args.items is None:
            args.items = list(spec.items)
        diary = diary_from_args(args)
        options = options_from_args(args)
    for note in diary.warnings:  # as `lagwise inspect` lists them
        print(f"lagwise: note: {note}", file=sys.stderr)
    result = fit(diary, spec, options)
    print(format_result(result))
    responses = impulse_responses(result, args.horizon)
    print()
    print(format_responses(responses))
    check = boot = None
    if args.lag2_check:
        check = lag2_check(diary, spec, options)
        print()
        print(format_lag2(check))
    if args.bootstrap is not None:
        boot = run_bootstrap(args, diary, spec, options, result)
        print()
        print(format_bootstrap(boot))
    written = write_json(args.json, fit_document(result, responses, check, boot))
    saved = save_fitted(args, project, spec, options, result, check, boot)
    if not (written and saved):
        return 2
    if not result.converged:
        print("lagwise: the optimiser did not converge; results are flagged", file=sys.stderr)
        return 3
    return 0


def write_json(path: str | None, doc: dict) -> bool:
    """--json: write the results (atomically); a failure is one line on stderr, and False,
    so that the project is still saved."""
    if not path:
        return True
    try:
        write_output(path, json.dumps(doc, indent=2, allow_nan=False), "the results")
    except LagwiseError as error:
        print(f"lagwise: {error}", file=sys.stderr)
        return False
    print(f"\nResults written to {path}")
    return True


def save_fitted(args: argparse.Namespace, project: Project | None, spec: ModelSpec,
                options: FitOptions, result, check: Lag2Check | None = None,
                boot: Bootstrap | None = None) -> bool:
    """--save: the data, model, settings and result as a project (atomically), the run
    keeping its lag-2 check and bootstrap; a failure is one line on stderr, and False,
    whether or not the JSON was written."""
    if args.save is None:
        return True
    try:
        if project is None:
            project = Project.of_recipe(embed_file(args.data), recipe_from_args(args),
                                        spec=spec, options=options)
        project = with_estimate(project, result)
        kept = {"bootstrap": boot} if boot is not None else {}
        if check is not None and tests_result(check, result):
            kept["lag2"] = check
        project = replace(project, runs=update_run(project.runs, project.current_run, **kept))
        save_project(project, args.save)
    except LagwiseError as error:
        print(f"lagwise: {error}", file=sys.stderr)
        return False
    print(f"\nProject saved to {args.save}")
    return True


def check_bootstrap_arguments(args: argparse.Namespace) -> None:
    """Refuse bootstrap options without a bootstrap before anything is fitted (their ranges
    are checked when they are parsed)."""
    if args.bootstrap is None and (args.jobs is not None or args.seed != 0 or args.scheduler):
        raise SpecError("--seed, --jobs and --scheduler go with --bootstrap N")
    scheduler_address(args.scheduler)      # a mistyped address, before anything is fitted


def run_bootstrap(args: argparse.Namespace, diary, spec: ModelSpec, options: FitOptions,
                  result) -> Bootstrap:
    """The bootstrap of `result` asked for with --bootstrap, with progress on stderr."""
    return bootstrap(diary, spec, options, result, replicates=args.bootstrap, seed=args.seed,
                     jobs=args.jobs, monitor=StderrProgress(), scheduler=args.scheduler)


class StderrProgress:
    """Progress on stderr, one line per tenth of the work."""

    def __init__(self) -> None:
        self._shown = -1

    def report(self, fraction: float, message: str) -> None:
        tenth = int(fraction * 10)
        if tenth > self._shown:
            self._shown = tenth
            print(f"lagwise: {message}", file=sys.stderr, flush=True)

    def cancelled(self) -> bool:
        return False


def project_to_refit(args: argparse.Namespace) -> Project:
    """The project named as DATA; refuses options that would override what it stores."""
    blank = argparse.ArgumentParser()
    add_arguments(blank)
    defaults = vars(blank.parse_args(["project.lagwise"]))
    given = ["--" + name.replace("_", "-") for name, default in defaults.items()
             if name not in PROJECT_RUN_OPTIONS and getattr(args, name, default) != default]
    if given:
        raise SpecError(f"{args.data} holds its own data settings, model and estimator "
                        f"settings; leave out {', '.join(given)}")
    project = open_project(args.data)
    if project.spec is None or not project.spec.states:
        raise ProjectError(f"{args.data}: the project has no model yet; build one in the "
                           "window, or fit the data file with --state")
    return project
