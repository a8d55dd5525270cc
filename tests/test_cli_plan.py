"""`lagwise plan`: the JSON it writes is the engine's plan, the README's line runs, the lag-2
check is planned, and bad input is one line with exit code 2."""

from __future__ import annotations

import json
import re
import shlex
from pathlib import Path

import pytest

from lagwise.desktop.cli import main
from lagwise.models import plantruth
from lagwise.models.design import Design
from lagwise.models.plan import run_plan
from lagwise.models.project import open_project
from lagwise.resources import demo_diary_path

ROOT = Path(__file__).resolve().parents[1]
MODEL = {"states": [{"name": "a", "items": ["a1"]}, {"name": "b", "items": ["b1"]}],
         "inertia": 0.3, "cross_lagged": [{"from": "a", "to": "b", "effect": 0.15}]}


@pytest.fixture
def model_file(tmp_path):
    path = tmp_path / "model.json"
    path.write_text(json.dumps(MODEL), encoding="utf-8")
    return path


def test_the_json_is_the_engines_plan(tmp_path, model_file, capsys):
    out = tmp_path / "plan.json"
    assert main(["plan", "--model", str(model_file), "--days", "12,8", "--prompts", "5",
                 "--answered", "0.8", "--replications", "4", "--seed", "3", "--jobs", "1",
                 "--json", str(out)]) == 0
    doc = json.loads(out.read_text(encoding="utf-8"))
    plan = run_plan(plantruth.from_json(MODEL), [Design(8, 5, 0.8), Design(12, 5, 0.8)],
                    replications=4, seed=3, jobs=1)
    assert doc == json.loads(json.dumps(plan.to_json()))
    first = doc["designs"][0]
    assert {"days", "prompts", "answered", "replications", "converged", "paths"} <= set(first)
    assert {"kind", "from", "to", "truth", "power", "bias", "sd", "coverage"} <= \
        set(first["paths"][0])
    shown = capsys.readouterr().out
    assert "assumes the model is right" in shown and plan.sentences()[0] in shown


def test_the_lag2_check_finds_a_strong_lag2_effect_and_rarely_a_null_one(tmp_path, model_file):
    found = {}
    for effect in ("0.5", "0"):
        out = tmp_path / f"lag2-{effect}.json"
        assert main(["plan", "--model", str(model_file), "--days", "40", "--prompts", "6",
                     "--replications", "4", "--jobs", "2", "--lag2", "a", "a", effect,
                     "--json", str(out)]) == 0
        found[effect] = json.loads(out.read_text())["designs"][0]["lag2_power"]
    # a lag-2 inertia of 0.5 over ~100 answered within-day triples is detected almost
    # always; with no lag-2 effect the test rejects at its 5% level (common practice)
    assert found["0.5"] >= 3 / 4 and found["0"] <= 1 / 4


def test_the_readme_plan_line_runs_on_the_saved_demo_project(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    line = re.search(r"^lagwise plan .*$", readme, re.M)
    assert line is not None, "README.md: no 'lagwise plan' line"
    argv = shlex.split(line.group(0), comments=True)[1:]
    argv[argv.index("--replications") + 1] = "2"      # the README's count takes minutes
    assert main(["fit", str(demo_diary_path()), "--day", "day", "--prompt", "prompt",
                 "--state", "tension=tense,restless,worried",
                 "--state", "low mood=sad,flat,hopeless", "--state", "energy=lively,focused,rested",
                 "--save", argv[1]]) == 0
    assert main(argv) == 0
    assert "of diaries" in capsys.readouterr().out


@pytest.mark.parametrize("argv, words", [
    (["--days", "20"], "either PROJECT.lagwise or --model"),
    (["--model", "MODEL", "--days", "20,x"], "'x' is not a whole number"),
    (["--model", "MODEL", "--days", "1"], "number of days"),
    (["--model", "MODEL", "--days", "20", "--answered", "0"], "share of prompts answered"),
    (["--model", "MODEL", "--days", "20", "--lag2", "a", "c", "0.1"], "no state 'c'"),
    (["--model", "MODEL", "--days", "20", "--run", "other"], "--run goes with PROJECT"),
    (["--model", "MODEL", "--days", "20", "--estimator", "exact", "--night-gap", "-1"],
     "night gap"),
    (["--model", "NOFILE", "--days", "20"], "cannot read"),
    (["--model", "BAD", "--days", "20"], "model.cross_lagged[0]: names the state 'c'"),
])
def test_bad_input_is_one_line_and_exit_2(tmp_path, model_file, capsys, argv, words):
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({**MODEL, "cross_lagged": [{"from": "a", "to": "c",
                                                          "effect": 0.1}]}))
    names = {"MODEL": str(model_file), "NOFILE": str(tmp_path / "none.json"), "BAD": str(bad)}
    argv = [names.get(a, a) for a in argv]
    assert main(["plan", *argv, "--prompts", "5", "--replications", "2"]) == 2
    err = capsys.readouterr().err
    assert words in err and err.count("\n") == 1


def test_a_named_run_is_the_truth_and_an_unknown_run_is_refused(tmp_path, capsys):
    saved = tmp_path / "p.lagwise"
    assert main(["fit", str(demo_diary_path()), "--day", "day", "--prompt", "prompt",
                 "--state", "tension=tense,restless,worried", "--state",
                 "low mood=sad,flat,hopeless", "--save", str(saved)]) == 0
    capsys.readouterr()
    assert main(["plan", str(saved), "--run", "other", "--days", "20", "--prompts", "6"]) == 2
    assert "no run named 'other'" in capsys.readouterr().err
    out = tmp_path / "plan.json"
    assert main(["plan", str(saved), "--run", "Run 1", "--days", "10", "--prompts", "6",
                 "--replications", "2", "--jobs", "1", "--json", str(out)]) == 0
    result = open_project(saved).run.result
    paths = json.loads(out.read_text())["designs"][0]["paths"]
    inertia = next(p for p in paths if p["kind"] == "inertia" and p["to"] == "tension")
    assert inertia["truth"] == result.get("inertia", "tension", "tension").estimate
