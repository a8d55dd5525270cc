"""The `lagwise` command: a small dispatcher over subcommands.

    lagwise [PROJECT]         open the window (desktop.app.run_gui)
    lagwise inspect DATA ...  what a diary file holds (desktop.cli_inspect)
    lagwise fit DATA ...      fit a model (desktop.cli_fit)
    lagwise report PROJECT .. the report of a saved analysis (desktop.cli_report)
    lagwise batch DATA ...    one model per person of a long file (desktop.cli_batch)
    lagwise plan PROJECT ...  power and days for the next diary (desktop.cli_plan)
    lagwise bench ...         speed of the estimators (desktop.cli_bench)
    lagwise demo ...          the bundled demo (desktop.app.run_demo)

Each subcommand lives in its own module with `add_arguments(parser)` and `run(args) -> int`
and is imported only when it runs, so `lagwise inspect` never loads Qt. Problems the user
can cause (LagwiseError) are printed as one line "lagwise: <message>" with exit code 2.
"""

from __future__ import annotations

import argparse
import importlib
import os
import re
import sys
from dataclasses import dataclass
from pathlib import Path

from lagwise.models.errors import LagwiseError
from lagwise.models.names import shown


@dataclass(frozen=True)
class Command:
    module: str
    add_arguments: str
    run: str
    help: str


COMMANDS: dict[str, Command] = {
    "inspect": Command("lagwise.desktop.cli_inspect", "add_arguments", "run",
                       "what a diary file holds: prompts, answers, days, lag windows, items"),
    "fit": Command("lagwise.desktop.cli_fit", "add_arguments", "run",
                   "fit a dynamic factor model to a diary and report it"),
    "report": Command("lagwise.desktop.cli_report", "add_arguments", "run",
                      "write the report of a saved analysis as HTML or PDF"),
    "batch": Command("lagwise.desktop.cli_batch", "add_arguments", "run",
                     "fit the same model to every person of a long file, one model per "
                     "person"),
    "plan": Command("lagwise.desktop.cli_plan", "add_arguments", "run",
                    "plan the next diary: power and days needed, by simulation"),
    "bench": Command("lagwise.desktop.cli_bench", "add_arguments", "run",
                     "measure how fast the estimators are"),
    "demo": Command("lagwise.desktop.app", "add_demo_arguments", "run_demo",
                    "run the bundled demo diary"),
}
HELP_FLAGS = ("-h", "--help", "--version")
_CODE_LIST = re.compile(r"-\d[\d.]*(?:\s*,\s*-?\d[\d.]*)+")


class LagwiseParser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line: 'lagwise: <message> (...)'."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(2, f"lagwise: {message} (see '{self.prog} --help')\n")


def main(argv: list[str] | None = None) -> int:
    """Run the `lagwise` command line; returns the exit code."""
    argv = _join_code_lists(list(sys.argv[1:] if argv is None else argv))
    try:
        if _opens_window(argv):
            run_gui = _import_module("lagwise.desktop.app", "the window").run_gui
            return int(run_gui(argv) or 0)
        parser, chosen = _build_parser(argv[0])
        args = parser.parse_args(argv)  # exits for --help, --version and unknown commands
        return int(chosen(args) or 0)
    except SystemExit as stop:  # argparse: --help, --version, usage errors
        return stop.code if isinstance(stop.code, int) else (0 if stop.code is None else 2)
    except LagwiseError as error:
        print(f"lagwise: {_one_line(error)}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("lagwise: stopped", file=sys.stderr)
        return 130
    except BrokenPipeError:  # the reader of our output went away (e.g. `| head`)
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1


def _opens_window(argv: list[str]) -> bool:
    """No subcommand: the window opens (optionally with a project file)."""
    if not argv:
        return True
    first = argv[0]
    if first in COMMANDS or first in HELP_FLAGS:
        return False
    return first.startswith("-") or Path(first).suffix != "" or Path(first).exists()


def _build_parser(name: str):
    """The parser with every subcommand listed; only the chosen one is imported and filled."""
    parser = LagwiseParser(
        prog="lagwise",
        description="Lagwise: a dynamic factor model of one person's experience-sampling "
                    "diary. Without a command the window opens.",
    )
    parser.add_argument("--version", action="version", version=f"lagwise {_version()}")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND", required=True,
                                     help="what to do (lagwise COMMAND --help: its options)")
    chosen = None
    for command_name, command in COMMANDS.items():
        sub = commands.add_parser(command_name, help=command.help, description=command.help)
        if command_name != name:
            continue
        module = _import_module(command.module, f"the '{command_name}' command")
        add = getattr(module, command.add_arguments, None)
        if add is not None:
            add(sub)
        chosen = getattr(module, command.run)
    return parser, chosen


def _import_module(module: str, what: str):
    try:
        return importlib.import_module(module)
    except ModuleNotFoundError as error:
        if error.name != module:
            raise
        raise LagwiseError(f"{what} is not available in this installation") from error


def _join_code_lists(argv: list[str]) -> list[str]:
    """'--missing-codes -99,999' -> '--missing-codes=-99,999'.

    argparse would take a value such as -99,999 for an option name.
    """
    out: list[str] = []
    for token in argv:
        if out and out[-1].startswith("--") and "=" not in out[-1] and _CODE_LIST.fullmatch(token):
            out[-1] = f"{out[-1]}={token}"
        else:
            out.append(token)
    return out


def _one_line(error: BaseException) -> str:
    """The message on one line, any control character in it shown as its code."""
    return shown(" ".join(str(error).split()), limit=100_000) or type(error).__name__


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("lagwise")
    except PackageNotFoundError:
        return "(not installed)"


if __name__ == "__main__":
    sys.exit(main())
