"""`lagwise fit`: exit codes, the JSON contract and the one-line errors.

Data: the bundled demo (simulated from known parameters, resources/demo/demo_truth.json);
numbers in the JSON are compared with the engine's own result object on the same input.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from lagwise.desktop.cli import main
from lagwise.models.diary import TimeSettings
from lagwise.models.estimate import fit
from lagwise.models.spec import make_spec
from lagwise.models.recipe import load_diary

DEMO = Path(__file__).resolve().parents[1] / "resources" / "demo" / "demo_diary.csv"
STATES = ["--state", "tension=tense,restless,worried", "--state", "mood=sad,flat,hopeless",
          "--state", "energy=lively,focused,rested"]
GRID = ["--day", "day", "--prompt", "prompt"]


def test_fit_json_contract_matches_the_engine(tmp_path, capsys):
    out = tmp_path / "fit.json"
    code = main(["fit", str(DEMO), *GRID, *STATES, "--json", str(out)])
    assert code == 0
    text = capsys.readouterr().out
    assert "Inertia" in text and "pseudo-likelihood" in text and "not a diagnosis" in text
    doc = json.loads(out.read_text())
    assert doc["estimator"] == "stationary" and doc["converged"] is True
    assert set(doc["fit"]) >= {"chi2", "df", "p", "rmsea", "cfi", "tli", "srmr", "loglik", "aic", "bic"}
    diary = load_diary(DEMO, time=TimeSettings(mode="grid", day="day", prompt="prompt"),
                       items=["tense", "restless", "worried", "sad", "flat", "hopeless",
                              "lively", "focused", "rested"])
    spec = make_spec({"tension": ["tense", "restless", "worried"], "mood": ["sad", "flat", "hopeless"],
                      "energy": ["lively", "focused", "rested"]})
    result = fit(diary, spec)
    assert doc["n_windows"] == result.n_windows
    by_key = {(p["kind"], p["from"], p["to"]): p for p in doc["parameters"]}
    assert len(by_key) == len(result.parameters)
    for p in result.parameters:
        row = by_key[(p.kind, p.from_, p.to)]
        assert row["estimate"] == pytest.approx(p.estimate, rel=1e-6, abs=1e-8)
        assert (row["se"] is None) == (p.se is None)
    # kinds and directions of the contract
    assert ("inertia", "energy", "energy") in by_key and ("cross_lagged", "mood", "energy") in by_key
    assert ("loading", "tension", "tense") in by_key and ("intercept", "sad", "sad") in by_key
    assert ("innovation", "tension", "tension") in by_key and ("unique", "flat", "flat") in by_key
    assert by_key[("loading", "tension", "tense")]["se"] is None  # the marker is fixed
    assert doc["fit"]["chi2"] == pytest.approx(result.fit.chi2, rel=1e-6)


def test_not_converged_exits_3_and_still_writes(tmp_path, capsys):
    out = tmp_path / "fit.json"
    code = main(["fit", str(DEMO), *GRID, *STATES, "--max-iter", "2", "--json", str(out)])
    assert code == 3
    assert json.loads(out.read_text())["converged"] is False
    assert "DID NOT CONVERGE" in capsys.readouterr().out


@pytest.mark.parametrize("args, words", [
    (["--state", "a=tense,nope,worried"], "no column named 'nope'"),
    (["--state", "broken"], "NAME=ITEM"),
    ([], "--state"),
    (["--state", "a=tense,restless,worried", "--night-gap", "3"], "--night-gap needs --estimator exact"),
])
def test_bad_model_is_one_line_exit_2(args, words, capsys):
    code = main(["fit", str(DEMO), *GRID, *args])
    err = capsys.readouterr().err
    assert code == 2
    assert err.startswith("lagwise: ") and words in err and err.count("\n") == 1
    assert "Traceback" not in err


def test_lag2_check_json(tmp_path):
    out = tmp_path / "fit.json"
    assert main(["fit", str(DEMO), *GRID, *STATES, "--lag2-check", "--json", str(out)]) == 0
    check = json.loads(out.read_text())["lag2_check"]
    assert set(check["lr"]) == {"chi2", "df", "p"} and check["lr"]["df"] == 9
    kinds = {p["kind"] for p in check["paths"]}
    assert kinds == {"lag2", "unique_autocorrelation"} and len(check["paths"]) == 9 + 9
    assert all({"kind", "from", "to", "score", "p", "p_holm", "epc"} <= set(p) for p in check["paths"])
