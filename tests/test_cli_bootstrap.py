"""`lagwise fit --bootstrap N`: progress on stderr, the report section and the JSON key.

Data: the bundled demo (simulated and invented, resources/demo). The printed numbers are
compared with the Bootstrap rebuilt from the JSON the same run wrote (models.numbers.fmt is
the one formatter of both).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from lagwise.desktop.cli import main
from lagwise.models.bootstrap import Bootstrap
from lagwise.models.numbers import fmt

DEMO = Path(__file__).resolve().parents[1] / "resources" / "demo" / "demo_diary.csv"
STATES = ["--state", "tension=tense,restless,worried", "--state", "mood=sad,flat,hopeless",
          "--state", "energy=lively,focused,rested"]
GRID = ["--day", "day", "--prompt", "prompt"]


def test_bootstrap_report_json_and_progress(tmp_path, capsys):
    out = tmp_path / "fit.json"
    assert main(["fit", str(DEMO), *GRID, *STATES, "--bootstrap", "6", "--seed", "3",
                 "--jobs", "1", "--json", str(out)]) == 0
    captured = capsys.readouterr()
    assert "lagwise: Bootstrap: 6 of 6 replicates" in captured.err
    boot = Bootstrap.from_json(json.loads(out.read_text())["bootstrap"], "bootstrap")
    assert boot.replicates == 6 and boot.seed == 3 and boot.method == "days"
    section = captured.out.split("Stability of the lagged paths")[1]
    assert "6 replicates resampling whole days, seed 3" in section
    rows = [line.split() for line in section.splitlines()[2:] if line.startswith("  ") and "[" in line]
    paths = boot.stability()
    assert len(rows) == len(paths) == 9
    for row, path in zip(rows, paths):
        assert fmt(path.estimate) in row and fmt(path.same_sign) in row
        assert f"[{fmt(path.lower)}," in row and f"{fmt(path.upper)}]" in row
        assert row[-1] == ("yes" if path.excludes_zero else "no")


@pytest.mark.parametrize("args, words", [
    (["--bootstrap", "0"], "--bootstrap: the number of bootstrap replicates should be"),
    (["--jobs", "2"], "go with --bootstrap"),
    (["--bootstrap", "5", "--jobs", "0"], "--jobs: the number of worker processes should be"),
    (["--scheduler", "tcp://127.0.0.1:8786"], "--scheduler go with --bootstrap"),
    (["--bootstrap", "5", "--scheduler", "no address"], "is not a scheduler address"),
])
def test_bad_bootstrap_options_are_one_line_exit_2(args, words, capsys):
    assert main(["fit", str(DEMO), *GRID, *STATES, *args]) == 2
    err = capsys.readouterr().err
    assert err.startswith("lagwise: ") and words in err and err.count("\n") == 1


def test_save_keeps_the_check_and_the_bootstrap_with_the_run(tmp_path, capsys):
    # the saved project's run holds what the JSON of the same command holds
    from lagwise.models.project import open_project

    out, saved = tmp_path / "fit.json", tmp_path / "fit.lagwise"
    assert main(["fit", str(DEMO), *GRID, *STATES, "--lag2-check", "--bootstrap", "4",
                 "--jobs", "1", "--json", str(out), "--save", str(saved)]) == 0
    doc = json.loads(out.read_text())
    (run,) = open_project(saved).runs
    assert run.bootstrap is not None and run.lag2 is not None
    assert run.bootstrap.to_json() == Bootstrap.from_json(doc["bootstrap"], "bootstrap").to_json()
    assert run.lag2.to_json() == doc["lag2_check"]
