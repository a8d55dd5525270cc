"""The README's command-line example runs as written and reproduces the demo's own model.

The commands are read from README.md (the first ``` block after "The command line"), split
with shlex as a POSIX shell would, and run through `lagwise.desktop.cli.main` in a temporary
folder. The fit must be the model the window fits for the demo (resources/demo/demo_truth.json,
the spec `lagwise.desktop.app.load_demo` puts in the window), so its estimates equal
`models.estimate.fit` of that spec on the demo diary.
"""

from __future__ import annotations

import json
import re
import shlex
from pathlib import Path

import pytest

from lagwise.desktop.app import DEMO_TRUTH
from lagwise.desktop.cli import main
from lagwise.models.diary import TimeSettings
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.recipe import load_diary
from lagwise.models.spec import ModelSpec
from lagwise.resources import demo_diary_path

ROOT = Path(__file__).resolve().parents[1]


def readme_commands() -> list[list[str]]:
    """The README's command lines (continuations joined, comments dropped) as argv lists."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    block = re.search(r"\*\*The command line\*\*.*?```\n(.*?)```", readme, re.S)
    assert block is not None, "README.md: no command block after 'The command line'"
    text = block.group(1).replace("\\\n", " ")
    return [shlex.split(line, comments=True) for line in text.splitlines() if line.strip()]


def test_the_readme_fit_is_the_demo_model(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    commands = [c for c in readme_commands() if c[0] == "lagwise"
                and c[1] in ("demo", "fit", "inspect") and "--bootstrap" not in c]
    assert [c[1] for c in commands][:3] == ["demo", "inspect", "fit"]
    for argv in commands:
        assert main(argv[1:]) == 0, " ".join(argv)
    capsys.readouterr()
    shown = json.loads((tmp_path / "fit.json").read_text(encoding="utf-8"))
    spec = ModelSpec.from_json(json.loads(DEMO_TRUTH.read_text(encoding="utf-8"))["spec"])
    diary = load_diary(demo_diary_path(), time=TimeSettings(mode="grid", day="day", prompt="prompt"))
    window = fit(diary, spec, FitOptions(estimator="stationary", missing="fiml"))
    assert ModelSpec.from_json(shown["spec"]).paths == spec.paths
    by_name = {(p["kind"], p["from"], p["to"]): p["estimate"] for p in shown["parameters"]}
    for p in window.parameters:
        assert by_name[(str(p.kind), p.from_, p.to)] == pytest.approx(p.estimate, abs=1e-9)
    refit = json.loads((tmp_path / "refit.json").read_text(encoding="utf-8"))
    assert refit["parameters"] == shown["parameters"]


@pytest.mark.parametrize("extra, words", [
    (["--path", "tension->low mood"], "--paths inertia"),                       # needs inertia
    (["--paths", "inertia", "--path", "tension->nobody"], "is not FROM->TO"),
    (["--paths", "inertia", "--path", "tension low mood"], "is not FROM->TO"),
])
def test_a_single_path_is_named_plainly(capsys, extra, words):
    code = main(["fit", str(demo_diary_path()), "--day", "day", "--prompt", "prompt",
                 "--state", "tension=tense,restless,worried",
                 "--state", "low mood=sad,flat,hopeless", *extra])
    assert code == 2 and words in capsys.readouterr().err
