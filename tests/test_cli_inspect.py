"""`lagwise inspect`: the JSON contract on a gappy diary and one-line messages for bad files."""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from lagwise.desktop.cli import main

GRID_ARGS = ["--day", "day", "--prompt", "prompt"]


@pytest.fixture
def gappy_csv(tmp_path, grid_table) -> Path:
    """Three days of four prompts; day 1 misses prompt 2, day 3 misses prompts 3 and 4
    (4 is the last prompt: the grid still has 4 prompts from days 1 and 2); one item skipped."""
    table = grid_table(3, 4, drop=[(1, 2), (3, 3), (3, 4)], seed=7)
    table.loc[4, "tense"] = np.nan  # day 2, prompt 2
    path = tmp_path / "gappy.csv"
    table.to_csv(path, index=False)
    return path


def run_main(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_json_contract_on_a_gappy_diary(capsys, tmp_path, gappy_csv):
    out_path = tmp_path / "summary.json"
    code, out, err = run_main(capsys, "inspect", str(gappy_csv), *GRID_ARGS,
                              "--json", str(out_path))
    assert code == 0 and err == ""
    summary = json.loads(out_path.read_text(encoding="utf-8"))
    # Hand count: 3 days x 4 prompts = 12 scheduled, 3 absent -> 9 answered.
    assert summary["occasions"] == 12 and summary["days"] == 3 and summary["answered"] == 9
    # Depth 1 complete windows: day 1: 3-4; day 2: 3-4 (2 has a skipped item, so 1-2 and
    # 2-3 are partial); day 3: 1-2 -> 3. Depth 2: each day's triples 1-2-3 and 2-3-4 hold
    # a missed prompt or the skipped item -> 0.
    assert summary["windows"] == {"1": 3, "2": 0}
    # Item statistics against pandas on the same file (mean; SD with divisor n - 1).
    table = pd.read_csv(gappy_csv)
    assert list(summary["items"]) == ["calm", "tense", "tired"]
    for name, stats in summary["items"].items():
        assert stats["missing"] == 12 - table[name].notna().sum()
        assert stats["mean"] == pytest.approx(table[name].mean(), rel=1e-12)
        assert stats["sd"] == pytest.approx(table[name].std(), rel=1e-12)
    assert "prompts scheduled: 12" in out and "answered: 9" in out


def test_json_to_standard_output(capsys, gappy_csv):
    code, out, _ = run_main(capsys, "inspect", str(gappy_csv), *GRID_ARGS, "--json", "-")
    assert code == 0 and json.loads(out)["occasions"] == 12


def test_missing_codes_option_accepts_negative_lists(capsys, tmp_path):
    path = tmp_path / "codes.csv"
    path.write_text("a,b\n1,-99\n999,2\n3,4\n", encoding="utf-8")
    code, out, err = run_main(capsys, "inspect", str(path), "--missing-codes", "-99,999",
                              "--json", "-")
    assert code == 0, err
    items = json.loads(out)["items"]
    assert items["a"]["missing"] == 1 and items["b"]["missing"] == 1


def _write(tmp_path: Path, name: str, content: str | bytes) -> Path:
    path = tmp_path / name
    if isinstance(content, bytes):
        path.write_bytes(content)
    else:
        path.write_text(content, encoding="utf-8")
    return path


BAD_INPUTS = [
    # (file name, content, extra arguments, words the message must hold)
    ("text.csv", "day,prompt,a,b\n1,1,2,3\n1,2,x,4\n", GRID_ARGS + ["--items", "a,b"],
     ["column 'a'", "row 3 (counting the header as row 1)", "'x' is not a number"]),
    ("twice.csv", "day,prompt,a,b\n1,1,2,3\n1,2,2,4\n1,2,3,4\n", GRID_ARGS,
     ["day 1, prompt 2 appears twice", "rows 3 and 4"]),
    ("stamps.csv", "time,a,b\n2024-03-01 08:00,1,2\nlater,2,3\n", ["--time", "time"],
     ["column 'time'", "row 3", "'later' is not a date and time"]),
    ("silent.csv", "a,b,c\n1,,2\n2,,3\n", ["--items", "a,b,c"],
     ["column 'b'", "no answers"]),
    ("single.csv", "a,note\n1,x\n2,y\n", [], ["only one item column ('a')"]),
    ("empty.csv", "", [], ["the file is empty"]),
    ("unknown.csv", "day,prompt,a,b\n1,1,2,3\n", ["--day", "dya", "--prompt", "prompt"],
     ["no column named 'dya'", "did you mean 'day'"]),
    ("binary.csv", b"\x00\x01\x02\x03\xff\x00", [], ["cannot read the file as text"]),
    ("table.json", "{}", [], ["unknown kind of file '.json'"]),
]


@pytest.mark.parametrize("name, content, extra, words", BAD_INPUTS,
                         ids=[case[0] for case in BAD_INPUTS])
def test_bad_input_gives_one_line_and_exit_2(capsys, tmp_path, name, content, extra, words):
    path = _write(tmp_path, name, content)
    code, out, err = run_main(capsys, "inspect", str(path), *extra)
    assert code == 2 and out == ""
    assert err.endswith("\n") and err.count("\n") == 1, err
    assert err.startswith(f"lagwise: {path}")
    for word in words:
        assert word in err


def test_conflicting_time_options(capsys, gappy_csv):
    code, _, err = run_main(capsys, "inspect", str(gappy_csv), "--day", "day", "--time", "day")
    assert code == 2 and err.startswith("lagwise: choose either --day and --prompt")
    code, _, err = run_main(capsys, "inspect", str(gappy_csv), "--day", "day")
    assert code == 2 and "--day and --prompt go together" in err


def test_usage_errors_are_one_line(capsys):
    code, _, err = run_main(capsys, "inspect")
    assert code == 2 and err.count("\n") == 1 and err.startswith("lagwise: ")
    code, _, err = run_main(capsys, "inpsect", "x")
    assert code == 2 and "invalid choice" in err


def test_help_lists_the_options(capsys):
    code, out, _ = run_main(capsys, "inspect", "--help")
    assert code == 0 and "--max-gap" in out and "--missing-codes" in out


def test_console_command_prints_no_traceback(tmp_path):
    # The installed entry point, in a fresh process: exit 2, one line, no traceback.
    path = _write(tmp_path, "empty.csv", "")
    command = shutil.which("lagwise", path=str(Path(sys.executable).parent))
    assert command is not None, "the lagwise command is not installed beside this Python"
    done = subprocess.run([command, "inspect", str(path)], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 2
    assert done.stderr == f"lagwise: {path}: the file is empty\n"


@pytest.fixture
def likert_csv(tmp_path) -> Path:
    """'calm' on a 1-7 scale answered 2..7, mostly 2; 'tense' answered 1..7 (random draws)."""
    rng = np.random.default_rng(2)
    rows = [(d, p) for d in range(1, 15) for p in range(1, 7)]
    table = pd.DataFrame(rows, columns=["day", "prompt"])
    table["calm"] = np.minimum(2 + rng.poisson(0.4, len(rows)), 7).astype(float)
    table.loc[0, "calm"] = 7.0
    table["tense"] = rng.integers(1, 8, len(rows)).astype(float)
    path = tmp_path / "likert.csv"
    table.to_csv(path, index=False)
    return path


def test_scale_option_sets_where_floor_and_ceiling_are_counted(capsys, likert_csv):
    calm = pd.read_csv(likert_csv)["calm"]
    code, out, _ = run_main(capsys, "inspect", str(likert_csv), *GRID_ARGS, "--json", "-")
    items = json.loads(out)["items"]
    assert code == 0 and items["calm"]["scale"] == [1.0, 7.0]  # guessed: the usual 1-7
    assert items["tense"]["scale"] == [1.0, 7.0]
    code, out, _ = run_main(capsys, "inspect", str(likert_csv), *GRID_ARGS, "--scale", "calm=2-7")
    share = 100 * np.mean(calm == 2)  # answers at the stated low end, counted with pandas
    assert code == 0 and f"Item 'calm': {share:.0f}% of answers at the low end" in out
    code, out, _ = run_main(capsys, "inspect", str(likert_csv), *GRID_ARGS, "--scale", "0-10",
                            "--json", "-")
    assert [v["scale"] for v in json.loads(out)["items"].values()] == [[0.0, 10.0]] * 2
    code, out, _ = run_main(capsys, "inspect", str(likert_csv), *GRID_ARGS, "--scale=-3-9",
                            "--json", "-")
    assert json.loads(out)["items"]["calm"]["scale"] == [-3.0, 9.0]


@pytest.mark.parametrize("value, words", [("mood=1-7", "no item 'mood'"),
                                          ("7-1", "low end must be below"),
                                          ("1to7", "LOW-HIGH")])
def test_bad_scale_is_one_line_and_exit_2(capsys, likert_csv, value, words):
    code, out, err = run_main(capsys, "inspect", str(likert_csv), *GRID_ARGS, "--scale", value)
    assert code == 2 and words in err and len(err.strip().splitlines()) == 1


def test_a_projects_stated_scales_are_used(capsys, likert_csv, tmp_path):
    from lagwise.models.diary import TimeSettings
    from lagwise.models.project import Project, embed_file, save_project
    from lagwise.models.recipe import DiaryRecipe

    recipe = DiaryRecipe.of(["calm", "tense"], TimeSettings(mode="grid", day="day",
                                                              prompt="prompt"),
                            scales={"calm": (2.0, 7.0)})
    path = tmp_path / "likert.lagwise"
    save_project(Project.of_recipe(embed_file(likert_csv), recipe), path)
    code, out, _ = run_main(capsys, "inspect", str(path), "--json", "-")
    items = json.loads(out)["items"]
    assert code == 0 and items["calm"]["scale"] == [2.0, 7.0]   # as stated in the project
    assert items["tense"]["scale"] == [1.0, 7.0]               # guessed
    code, out, _ = run_main(capsys, "inspect", str(path), "--scale", "calm=1-9", "--json", "-")
    assert json.loads(out)["items"]["calm"]["scale"] == [1.0, 9.0]  # the option wins
