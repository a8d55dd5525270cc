"""What Lagwise reads: option values, column names, time stamps and names on the command line.

Each refusal is checked for one readable line and exit code 2; accepted values for reaching
the engine. Input diaries are the bundled demo (simulated from known parameters) given a
clock time per prompt, or diaries simulated here. Times and offsets are checked against
Python's datetime (the outside world), ranges against models.limits (the documented ranges).
"""

from __future__ import annotations

import datetime as dt
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lagwise.desktop import cli_fit
from lagwise.desktop.cli import main
from lagwise.models.bench.cases import bench_model
from lagwise.models.diary import TimeSettings
from lagwise.models.errors import DataError, FieldError, LagwiseError, SpecError
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions, working_bytes
from lagwise.models.limits import (
    DEPTH, JOBS, MAX_GAP_MINUTES, MAX_ITER, MEMORY_BUDGET_BYTES, NIGHT_GAP, PROMPTS_PER_DAY,
    SEED,
)
from lagwise.models.readers import read_table
from lagwise.models.recipe import DiaryRecipe
from lagwise.models.simulate import simulate_diary
from lagwise.models.timegrid import diary_from_frame

DEMO = Path(__file__).resolve().parents[1] / "resources" / "demo" / "demo_diary.csv"

STATES = ["--state", "tension=tense,restless,worried", "--state", "mood=sad,flat,hopeless"]
FAST = settings(max_examples=25, deadline=None,
                suppress_health_check=[HealthCheck.function_scoped_fixture])


@pytest.fixture(scope="module")
def timed(tmp_path_factory):
    """The demo diary with a clock time per prompt (08:00, then every 90 minutes)."""
    table = pd.read_csv(DEMO)
    clock = pd.to_datetime(table["day"]) + pd.to_timedelta(8 + 1.5 * (table["prompt"] - 1),
                                                           unit="h")
    table.insert(0, "time", clock.dt.strftime("%Y-%m-%d %H:%M"))
    path = tmp_path_factory.mktemp("timed") / "timed.csv"
    table.drop(columns=["day", "prompt"]).to_csv(path, index=False)
    return path


def one_line_error(capsys) -> str:
    err = capsys.readouterr().err.strip()
    assert err.startswith("lagwise: ") and "\n" not in err and "Traceback" not in err
    return err


# ------------------------------------------------------------------------ option values

@pytest.mark.parametrize("command, option, value", [
    ("inspect", "--max-gap", "nan"), ("inspect", "--max-gap", "inf"),
    ("inspect", "--max-gap", "1e300"), ("fit", "--night-gap", "-1"),
    ("fit", "--night-gap", "1000000000"), ("fit", "--max-iter", "0"),
    ("fit", "--max-iter", "-5"),
])
def test_bad_option_values_exit_2_with_one_line(timed, capsys, command, option, value):
    extra = STATES + (["--estimator", "exact"] if option == "--night-gap" else [])
    code = main([command, str(timed), "--time", "time", *(extra if command == "fit" else []),
                 f"{option}={value}"])
    assert code == 2
    assert option in one_line_error(capsys)


NUMBERS = st.one_of(st.integers(-10**12, 10**12), st.integers(), st.floats(),
                    st.sampled_from(["1e300", "-0", "0.5", "1e3", "nan", "-inf", "0x10", ""]))
OPTIONS = [("--max-gap", MAX_GAP_MINUTES), ("--prompts-per-day", PROMPTS_PER_DAY),
           ("--depth", DEPTH), ("--night-gap", NIGHT_GAP), ("--max-iter", MAX_ITER),
           ("--horizon", cli_fit.HORIZON), ("--bootstrap", cli_fit.REPLICATES),
           ("--seed", SEED), ("--jobs", JOBS)]


class _Reached(LagwiseError):
    """Raised by the stand-in estimation: the options were accepted."""


@pytest.mark.parametrize("option, limit", OPTIONS, ids=[o for o, _ in OPTIONS])
@FAST
@given(number=NUMBERS)
def test_any_number_text_is_accepted_within_its_range_or_refused_in_one_line(
        timed, capsys, monkeypatch, option, limit, number):
    def reached(*args, **kwargs):
        raise _Reached("estimation reached")

    monkeypatch.setattr(cli_fit, "fit", reached)
    text = str(number)
    setting = {"--max-gap": ["--time", "time"], "--prompts-per-day": ["--day", "day", "--prompt", "prompt"],
               "--night-gap": ["--time", "time", "--estimator", "exact"],
               "--seed": ["--time", "time", "--bootstrap", "2"],
               "--jobs": ["--time", "time", "--bootstrap", "2"]}.get(option, ["--time", "time"])
    data = str(DEMO) if option == "--prompts-per-day" else str(timed)
    code = main(["fit", data, *setting, *STATES, f"{option}={text}"])
    err = one_line_error(capsys)
    try:
        value = int(text) if limit.whole else float(text)
    except ValueError:
        value = None
    assert code == 2
    if value is not None and limit.allows(value):
        # the demo numbers its prompts up to 6: a shorter schedule is refused by the diary
        short = option == "--prompts-per-day" and value < 6
        assert ("beyond the" if short else "estimation reached") in err
    else:
        assert code == 2 and option in err and "estimation reached" not in err


@FAST
@given(number=NUMBERS)
def test_max_gap_of_inspect_runs_or_is_refused(timed, capsys, number):
    code = main(["inspect", str(timed), "--time", "time", f"--max-gap={number}"])
    out = capsys.readouterr()
    try:
        allowed = MAX_GAP_MINUTES.allows(float(str(number)))
    except ValueError:
        allowed = False
    assert code == (0 if allowed else 2)
    assert "Traceback" not in out.err and (allowed or out.err.count("\n") == 1)


def test_the_same_ranges_hold_for_project_files_and_settings():
    assert FitOptions(depth=np.int64(2)).depth == 2  # numbers from numpy are numbers too
    with pytest.raises(SpecError, match="window depth"):
        FitOptions(depth=True)
    assert FitOptions.from_json({**FitOptions().to_json(), "max_iter": 1}).max_iter == 1
    for key, value in (("max_iter", 0), ("depth", 51)):
        with pytest.raises(FieldError):
            FitOptions.from_json({**FitOptions().to_json(), key: value})
    for gap in (float("nan"), float("inf"), 0.0, 1e300):
        with pytest.raises(DataError, match="longest gap"):
            TimeSettings(mode="timestamp", time="time", max_gap_minutes=gap)
    with pytest.raises(FieldError, match="max_gap_minutes"):
        TimeSettings.from_json({**TimeSettings().to_json(), "max_gap_minutes": 1e300})


def _joined_diary(days: int, prompts: int, p_missed: float = 0.0):
    spec, truth = bench_model(2, 3)
    diary = simulate_diary(spec, days=days, prompts_per_day=prompts, p_missed=p_missed, seed=3,
                           **truth)
    return spec, diary


def test_a_night_gap_needing_huge_arrays_is_refused_before_allocating(tmp_path, capsys):
    # 5,000 days joined by 1,000 empty prompts each: about 5 million filtered occasions.
    spec, diary = _joined_diary(5000, 2)
    table = pd.DataFrame(diary.values, columns=diary.items)
    table.insert(0, "day", diary.day + 1)
    table.insert(1, "prompt", diary.prompt.astype(int))
    path = tmp_path / "long.csv"
    table.to_csv(path, index=False)
    states = [f"--state={s.name}={','.join(s.items)}" for s in spec.states]
    code = main(["fit", str(path), "--day", "day", "--prompt", "prompt", *states,
                 "--estimator", "exact", "--night-gap", "1000"])
    err = one_line_error(capsys)
    assert code == 2 and "GiB" in err and "night gap" in err
    size, _, _ = working_bytes(diary, spec, FitOptions(estimator="exact", night_gap=1000))
    assert size > MEMORY_BUDGET_BYTES


def test_a_window_depth_needing_huge_arrays_is_refused():
    spec, diary = _joined_diary(1, 3000, p_missed=0.1)  # one long segment, missed prompts
    with pytest.raises(SpecError, match="GiB.*smaller window depth"):
        fit(diary, spec, FitOptions(depth=50))


# ------------------------------------------------------------------------ column names

@pytest.mark.parametrize("header, positions, suffix", [
    ("a,a,b", "columns 1 and 2", ".csv"), ("b,a,x,a ", "columns 2 and 4", ".csv"),
    ("a\tb\ta", "columns 1 and 3", ".tsv"), ("a;a", "columns 1 and 2", ".txt"),
])
def test_repeated_column_names_are_refused_with_positions(tmp_path, header, positions, suffix):
    path = tmp_path / f"twice{suffix}"
    delim = "\t" if "\t" in header else (";" if ";" in header else ",")
    width = len(header.split(delim))
    path.write_text(header + "\n" + delim.join(["1"] * width) + "\n")
    with pytest.raises(DataError, match=positions):
        read_table(path)


def test_repeated_names_in_a_workbook_are_refused(tmp_path):
    openpyxl = pytest.importorskip("openpyxl")
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.append(["calm", "tense", "calm"])
    sheet.append([1, 2, 3])
    path = tmp_path / "twice.xlsx"
    book.save(path)
    with pytest.raises(DataError, match="columns 1 and 3"):
        read_table(path)


def test_a_name_like_pandas_renaming_is_kept(tmp_path):
    path = tmp_path / "dotted.csv"
    path.write_text("a,a.1,b\n1,2,3\n")
    assert list(read_table(path).columns) == ["a", "a.1", "b"]


def test_only_the_recipe_columns_are_read(timed):
    recipe = DiaryRecipe.of(["tense", "sad"], TimeSettings(mode="timestamp", time="time"))
    table = read_table(timed, recipe.columns())
    assert list(table.columns) == ["time", "tense", "sad"]
    full = pd.read_csv(timed)  # pandas reading the whole file gives the same cells
    np.testing.assert_array_equal(table["tense"].to_numpy(), full["tense"].to_numpy())


def test_reading_in_chunks_keeps_cells_and_rows(tmp_path, monkeypatch):
    from lagwise.models import readers

    monkeypatch.setattr(readers, "CHUNK_ROWS", 3)  # seven rows: three chunks
    stamps = [f"2026-03-0{d} 0{h}:00" for d in (1, 2) for h in (8, 9, 7)] + ["2026-03-03 08:00"]
    path = tmp_path / "chunks.csv"
    pd.DataFrame({"time": stamps, "x": np.arange(7) / 4, "note": list("abcdefg")}).to_csv(
        path, index=False)
    table = read_table(path)
    plain = pd.read_csv(path)  # pandas reading the file in one go
    np.testing.assert_array_equal(table["x"].to_numpy(), plain["x"].to_numpy())
    assert table["note"].tolist() == plain["note"].tolist()
    assert table["time"].tolist() == pd.to_datetime(plain["time"]).tolist()
    assert table.index.tolist() == list(range(2, 9))  # file rows, the header being row 1
    stamps[5] = "2026-03-02 25:00"  # an impossible hour in the second chunk
    pd.DataFrame({"time": stamps, "x": 1.0, "y": 2.0}).to_csv(path, index=False)
    with pytest.raises(DataError, match="row 7 .*'2026-03-02 25:00' is not a date and time"):
        DiaryRecipe.of(["x", "y"], TimeSettings(mode="timestamp", time="time")).read(path)


# ------------------------------------------------------------------------ time stamps

def test_clocks_going_back_keep_utc_order():
    # 2026-10-25 in central Europe: 02:30+02:00 is 00:30 UTC, 02:10+01:00 is 01:10 UTC.
    frame = pd.DataFrame({"time": ["2026-10-25T02:10+01:00", "2026-10-25T02:30+02:00",
                                   "2026-10-25T01:50+02:00"],
                          "x": [3.0, 2.0, 1.0], "y": [1.0, 2.0, 3.0]})
    diary = diary_from_frame(frame, ["x", "y"], TimeSettings(mode="timestamp", time="time",
                                                             max_gap_minutes=45))
    assert diary.values[:, 0].tolist() == [1.0, 2.0, 3.0]
    # the gaps are 40 minutes in UTC: one segment; the diary keeps local wall time
    assert diary.segment.tolist() == [0, 0, 0]
    assert str(diary.time[2])[11:16] == "02:10"


def test_times_with_and_without_offsets_are_refused():
    frame = pd.DataFrame({"time": ["2026-10-25T02:10+01:00", "2026-10-25 02:30"],
                          "x": [1.0, 2.0], "y": [1.0, 2.0]})
    with pytest.raises(DataError, match="no UTC offset"):
        diary_from_frame(frame, ["x", "y"], TimeSettings(mode="timestamp", time="time"))


def test_day_first_dates_up_to_the_12th_are_refused_then_read_as_told(tmp_path, capsys):
    days = [dt.datetime(2026, 3, d, 9) for d in range(1, 13) for _ in range(2)]
    frame = pd.DataFrame({"time": [d.strftime("%d/%m/%Y %H:%M") for d in days],
                          "x": np.arange(24.0), "y": np.arange(24.0) % 5})
    path = tmp_path / "dayfirst.csv"
    frame.to_csv(path, index=False)
    assert main(["inspect", str(path), "--time", "time"]) == 2
    assert "day or the month first" in one_line_error(capsys)
    assert main(["inspect", str(path), "--time", "time", "--date-format", "%d/%m/%Y %H:%M",
                 "--json", "-"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["days"] == 12
    diary = diary_from_frame(frame, ["x", "y"], TimeSettings(
        mode="timestamp", time="time", date_format="%d/%m/%Y %H:%M"))
    assert diary.day_labels[1] == "2026-03-02"  # the 2nd of March, not the 3rd of February
    project = tmp_path / "dayfirst.lagwise"  # the format is kept with a saved project
    assert main(["fit", str(path), "--time", "time", "--date-format", "%d/%m/%Y %H:%M",
                 "--state", "s=x,y", "--save", str(project)]) in (0, 3)
    assert main(["fit", str(project)]) in (0, 3)
    assert "day or the month" not in capsys.readouterr().err


def test_a_day_column_of_ambiguous_dates_is_refused_then_read_as_told():
    frame = pd.DataFrame({"day": ["02/01/2026", "02/01/2026", "01/02/2026", "01/02/2026"],
                          "prompt": [1, 2, 1, 2], "x": [1.0, 2.0, 3.0, 4.0], "y": 1.0})
    grid = TimeSettings(mode="grid", day="day", prompt="prompt")
    with pytest.raises(DataError, match="column 'day'.*day or the month first"):
        diary_from_frame(frame, ["x", "y"], grid)
    told = diary_from_frame(frame, ["x", "y"], TimeSettings(
        mode="grid", day="day", prompt="prompt", date_format="%d/%m/%Y"))
    # read day first, 2 January (x = 1, 2) comes before 1 February (x = 3, 4)
    assert told.day_labels == ("2026-01-02", "2026-02-01")
    assert told.values[:, 0].tolist() == [1.0, 2.0, 3.0, 4.0]


def test_date_format_is_kept_and_old_settings_still_read():
    settings_ = TimeSettings(mode="timestamp", time="time", date_format="%d/%m/%Y %H:%M")
    assert TimeSettings.from_json(settings_.to_json()) == settings_
    old = {k: v for k, v in TimeSettings().to_json().items() if k != "date_format"}
    assert TimeSettings.from_json(old).date_format is None


OFFSETS = st.sampled_from([-300, -240, 0, 60, 120, 330, 600])
FORMATS = st.sampled_from(["iso-offset", "%Y-%m-%d %H:%M", "%d/%m/%Y %H:%M", "%m/%d/%Y %H:%M",
                           "%d.%m.%Y %H:%M"])


@settings(max_examples=60, deadline=None)
@given(minutes=st.lists(st.integers(0, 60 * 24 * 40), min_size=2, max_size=12),
       offsets=st.lists(OFFSETS, min_size=12, max_size=12), style=FORMATS, seed=st.integers(0, 9))
def test_diary_order_is_the_utc_order_or_an_error(minutes, offsets, style, seed):
    start = dt.datetime(2026, 3, 1, 6, tzinfo=dt.timezone.utc)
    instants = [start + dt.timedelta(minutes=m) for m in minutes]
    if style == "iso-offset":
        local = [t.astimezone(dt.timezone(dt.timedelta(minutes=o)))
                 for t, o in zip(instants, offsets)]
        texts = [t.isoformat(timespec="minutes") for t in local]
    else:  # no offsets: the wall time is the instant
        texts = [t.strftime(style) for t in instants]
    order = np.random.default_rng(seed).permutation(len(texts))
    frame = pd.DataFrame({"time": [texts[i] for i in order],
                          "x": [float(i) for i in order], "y": 1.0})
    try:
        diary = diary_from_frame(frame, ["x", "y"], TimeSettings(mode="timestamp", time="time"))
    except DataError:
        return
    read = [instants[int(i)] for i in diary.values[:, 0]]
    assert read == sorted(instants)


# ------------------------------------------------------------------------ names

def test_item_names_with_commas_come_from_a_file(tmp_path, capsys):
    table = pd.read_csv(DEMO).rename(columns={"tense": "tense, on edge"})
    data = tmp_path / "commas.csv"
    table.to_csv(data, index=False)
    names = tmp_path / "tension.txt"
    names.write_text("tense, on edge\nrestless\n\nworried\n", encoding="utf-8")
    code = main(["fit", str(data), "--day", "day", "--prompt", "prompt",
                 f"--state=tension=@{names}", "--state", "mood=sad,flat,hopeless"])
    assert code == 0
    assert "tense, on edge" in capsys.readouterr().out
    assert cli_fit.parse_states([f"t=@{names}"])[0].items == ("tense, on edge", "restless",
                                                               "worried")
    with pytest.raises(SpecError, match="cannot read the file"):
        cli_fit.parse_states([f"t=@{tmp_path / 'none.txt'}"])


def test_fit_prints_the_diary_notes(timed, tmp_path, capsys):
    table = pd.read_csv(timed)
    table.loc[5, "time"] = table.loc[4, "time"]  # two prompts at one time: the diary notes it
    path = tmp_path / "same_time.csv"
    table.to_csv(path, index=False)
    assert main(["fit", str(path), "--time", "time", *STATES]) == 0
    err = capsys.readouterr().err
    assert "lagwise: note: 1 prompts have the same time as the prompt before them" in err
