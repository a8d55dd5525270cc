"""`lagwise batch`: the files it writes, its exit codes, and a run killed midway that is
rerun and fits only the missing people."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from batch_people import people_tables, stacked
from lagwise.desktop.cli import main

MODEL = ["--day", "day", "--prompt", "prompt", "--state", "calm=c1,c2,c3",
         "--state", "drive=d1,d2,d3"]


def _long_file(tmp_path, n=3, short=False):
    tables = people_tables(n)
    if short:
        tables["short"] = tables["P00"].head(5)
    path = tmp_path / "long.csv"
    stacked(tables).to_csv(path, index=False)
    return path, tables


def test_every_person_fitted_exits_0_and_each_line_is_the_fit_of_that_person(tmp_path, capsys):
    data, tables = _long_file(tmp_path)
    out = tmp_path / "out"
    assert main(["batch", str(data), "--person", "person", *MODEL, "--jobs", "1",
                 "--out", str(out)]) == 0
    lines = [json.loads(line) for line in (out / "people.jsonl").read_text().splitlines()]
    assert [line["person"] for line in lines] == list(tables)
    own = tmp_path / "P01.csv"                     # the person's rows as a file of their own
    tables["P01"].to_csv(own, index=False)
    assert main(["fit", str(own), *MODEL, "--json", str(tmp_path / "P01.json")]) == 0
    alone = json.loads((tmp_path / "P01.json").read_text())
    assert set(lines[1]) - {"person"} == set(alone)
    np.testing.assert_allclose([p["estimate"] for p in lines[1]["parameters"]],
                               [p["estimate"] for p in alone["parameters"]], rtol=0, atol=1e-8)
    header = (out / "estimates.csv").read_text().splitlines()[0]
    assert header == "person,parameter,estimate,se,lower,upper"
    assert json.loads((out / "summary.json").read_text())["fitted"] == list(tables)
    assert "not a multilevel model" in capsys.readouterr().out


def test_some_people_failed_exits_4_and_lists_them(tmp_path, capsys):
    data, _ = _long_file(tmp_path, n=2, short=True)
    assert main(["batch", str(data), "--person", "person", *MODEL, "--jobs", "1",
                 "--out", str(tmp_path / "out")]) == 4
    err = capsys.readouterr().err
    assert "lagwise: short: failed: Too few complete lag windows" in err
    assert "P00: failed" not in err and "P01: failed" not in err


@pytest.mark.parametrize("extra, words", [
    (["--person", "who"], "no person column 'who'"),
    (["--person", "person", "--jobs", "2", "--scheduler", "tcp://127.0.0.1:1"], "not allowed"),
    (["--person", "person", "--seed", "3"], "--seed goes with --bootstrap"),
])
def test_bad_input_exits_2_with_one_line(tmp_path, capsys, extra, words):
    data, _ = _long_file(tmp_path, n=1)
    assert main(["batch", str(data), *extra, *MODEL, "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert words in err and err.count("\n") == 1


def test_a_batch_killed_midway_is_rerun_for_the_missing_people_only(tmp_path, capsys):
    data, tables = _long_file(tmp_path, n=12)
    out = tmp_path / "out"
    command = [sys.executable, "-m", "lagwise.desktop.cli", "batch", str(data), "--person",
               "person", *MODEL, "--jobs", "1", "--out", str(out)]
    process = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                               start_new_session=True)
    people = out / "people"
    deadline = time.monotonic() + 120
    while not (people.is_dir() and any(people.glob("*.json"))) and time.monotonic() < deadline:
        time.sleep(0.005)
    os.killpg(process.pid, signal.SIGKILL)
    process.wait()
    kept = {p.name: p.stat().st_mtime_ns for p in people.glob("*.json")}
    assert 0 < len(kept) < len(tables), "the batch was not killed midway"
    assert not (out / "people.jsonl").exists()
    capsys.readouterr()
    assert main(["batch", str(data), "--person", "person", *MODEL, "--jobs", "1",
                 "--out", str(out)]) == 0
    said = capsys.readouterr().out
    assert f"Fitted {len(tables) - len(kept)} people; {len(kept)} were already done" in said
    assert {name: (people / name).stat().st_mtime_ns for name in kept} == kept
    assert len((out / "people.jsonl").read_text().splitlines()) == len(tables)
