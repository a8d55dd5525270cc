"""Every option of every `lagwise` command explains itself in `--help`, and the window size
is named one way ("window of N prompts")."""

from __future__ import annotations

import argparse

import pytest

from lagwise.desktop import app, cli


def _actions(parser: argparse.ArgumentParser):
    """Every action of `parser` and of its subparsers, with the parser's name."""
    for action in parser._actions:
        yield parser.prog, action
        if isinstance(action, argparse._SubParsersAction):
            for sub in action.choices.values():
                yield from _actions(sub)


@pytest.mark.parametrize("command", sorted(cli.COMMANDS))
def test_every_option_of_every_command_has_help(command):
    parser, _ = cli._build_parser(command)
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    assert sub.choices[command]._actions, "the command has no options at all"
    missing = [f"{prog}: {'/'.join(action.option_strings) or action.dest}"
               for prog, action in _actions(parser)
               if action.help is None or not str(action.help).strip()
               if not isinstance(action, argparse._SubParsersAction._ChoicesPseudoAction)]
    assert missing == []


def test_every_command_is_listed_with_help():
    parser, _ = cli._build_parser("inspect")
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    assert sorted(c.dest for c in sub._choices_actions if c.help) == sorted(cli.COMMANDS)


def test_the_window_command_line_has_help(monkeypatch, capsys):
    with pytest.raises(SystemExit):
        app.run_gui(["--help"])
    assert "project (.lagwise)" in capsys.readouterr().out


def test_the_window_size_is_named_as_a_window_of_n_prompts():
    parser, _ = cli._build_parser("fit")
    fit = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction)).choices["fit"]
    depth = next(a for a in fit._actions if "--depth" in a.option_strings)
    assert "window of 2 prompts" in depth.help
    assert "window depth" not in fit.format_help()
