"""Everything Lagwise writes from the command line and the engine (fit and inspect JSON,
projects, autosaves) is replaced in one step or left byte-identical, with one plain line.

A full disk is simulated (tests/full_disk.py: ENOSPC halfway through the temporary file);
a missing folder, a folder and a read-only file are real. The diary is the bundled demo
(resources/demo, simulated); no number here is a check value, only bytes of files kept.
"""

from __future__ import annotations

import errno
import json
import os
import shutil
import sys
import time
from dataclasses import replace
from pathlib import Path

import pytest

from full_disk import fill_disk

from lagwise.desktop.cli import main
from lagwise.models.atomic import STALE_SECONDS, remove_stale_temporaries, write_atomic
from lagwise.models.diary import TimeSettings
from lagwise.models.errors import ProjectError
from lagwise.models.project import (
    Project, embed_file, find_recoveries, open_project, recovery_path, save_project, write_recovery,
)
from lagwise.models.spec import make_spec

DEMO = Path(__file__).resolve().parents[1] / "resources" / "demo" / "demo_diary.csv"
GRID = ["--day", "day", "--prompt", "prompt"]
STATE = ["--state", "tension=tense,restless,worried"]  # one of the demo's states (its README)
FULL = os.strerror(errno.ENOSPC)  # what the system says of a full disk
OLD = b'{"an older file": "kept byte for byte"}\n'
POSIX_USER = not sys.platform.startswith("win") and os.geteuid() != 0
READ_ONLY = pytest.mark.skipif(not POSIX_USER, reason="read-only files bind a POSIX non-root user")


@pytest.fixture
def demo_csv(tmp_path) -> Path:
    csv = tmp_path / "demo_diary.csv"
    shutil.copy(DEMO, csv)
    return csv


@pytest.fixture
def project(demo_csv) -> Project:
    """The demo diary embedded in a project with a one-state model (not fitted)."""
    spec = make_spec({"tension": ["tense", "restless", "worried"]})
    return Project(data=embed_file(demo_csv), items=spec.items,
                   time=TimeSettings(mode="grid", day="day", prompt="prompt"), spec=spec)


def run(capsys, *argv) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def one_plain_line(err: str) -> str:
    """stderr holds exactly one 'lagwise: ...' line and no traceback; that line."""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("lagwise: "), err
    assert "Traceback" not in err
    return lines[0]


def only_file(folder: Path, name: str) -> None:
    """`name` is there and no temporary file was left beside it."""
    assert sorted(p.name for p in folder.iterdir() if p.name.startswith(f".{name}")) == []
    assert (folder / name).exists()


# ----- a full disk ---------------------------------------------------------------------

@pytest.mark.parametrize("command", ["fit", "inspect"])
def test_a_full_disk_leaves_the_older_json_byte_identical(tmp_path, capsys, monkeypatch,
                                                           demo_csv, command):
    out = tmp_path / "r.json"
    out.write_bytes(OLD)
    fill_disk(monkeypatch)
    extra = STATE if command == "fit" else []
    code, _, err = run(capsys, command, demo_csv, *GRID, *extra, "--json", out)
    monkeypatch.undo()
    assert code == 2
    line = one_plain_line(err)
    assert FULL in line and "previous file is unchanged" in line
    assert out.read_bytes() == OLD
    only_file(tmp_path, "r.json")


def test_a_full_disk_leaves_the_older_project_and_autosave_byte_identical(
        tmp_path, monkeypatch, project):
    target = tmp_path / "robin.lagwise"
    target.write_bytes(OLD)
    autosave = recovery_path(target, tmp_path / "recovery")
    autosave.parent.mkdir()
    autosave.write_bytes(OLD)
    fill_disk(monkeypatch)
    for write in (lambda: save_project(project, target),
                  lambda: write_recovery(replace(project, file=target), tmp_path / "recovery")):
        with pytest.raises(ProjectError) as caught:
            write()
        assert "\n" not in str(caught.value) and "unchanged" in str(caught.value)
    monkeypatch.undo()
    assert target.read_bytes() == OLD and autosave.read_bytes() == OLD
    only_file(tmp_path, "robin.lagwise")
    only_file(autosave.parent, autosave.name)


# ----- targets that cannot be written ----------------------------------------------------

def test_fit_json_into_a_missing_folder_still_saves_the_project(tmp_path, capsys, demo_csv):
    saved = tmp_path / "ok.lagwise"
    code, out, err = run(capsys, "fit", demo_csv, *GRID, *STATE,
                         "--json", tmp_path / "no such folder" / "x.json", "--save", saved)
    assert code == 2
    assert "folder does not exist" in one_plain_line(err)
    assert f"Project saved to {saved}" in out
    assert open_project(saved).result is not None


def test_fit_project_that_cannot_be_saved_still_writes_the_json(tmp_path, capsys, demo_csv):
    result = tmp_path / "r.json"
    code, out, err = run(capsys, "fit", demo_csv, *GRID, *STATE, "--json", result,
                         "--save", tmp_path / "no such folder" / "ok.lagwise")
    assert code == 2
    assert "could not save the project (the folder does not exist)" in one_plain_line(err)
    assert f"Results written to {result}" in out
    assert json.loads(result.read_text(encoding="utf-8"))["converged"] is True


@pytest.mark.parametrize("command", ["fit", "inspect"])
def test_a_folder_as_json_target_is_one_line(tmp_path, capsys, demo_csv, command):
    folder = tmp_path / "r.json"
    folder.mkdir()
    extra = STATE if command == "fit" else []
    code, _, err = run(capsys, command, demo_csv, *GRID, *extra, "--json", folder)
    assert code == 2
    assert "it is a folder" in one_plain_line(err)
    assert folder.is_dir() and list(folder.iterdir()) == []


@READ_ONLY
@pytest.mark.parametrize("command", ["fit", "inspect"])
def test_a_read_only_json_target_is_refused_and_kept(tmp_path, capsys, demo_csv, command):
    out = tmp_path / "r.json"
    out.write_bytes(OLD)
    out.chmod(0o444)
    extra = STATE if command == "fit" else []
    code, _, err = run(capsys, command, demo_csv, *GRID, *extra, "--json", out)
    assert code == 2
    assert "read-only" in one_plain_line(err)
    assert out.read_bytes() == OLD


@READ_ONLY
def test_a_read_only_project_is_refused_and_kept(tmp_path, project):
    target = tmp_path / "robin.lagwise"
    target.write_bytes(OLD)
    target.chmod(0o444)
    with pytest.raises(ProjectError, match="read-only"):
        save_project(project, target)
    assert target.read_bytes() == OLD


# ----- symbolic links and leftovers of killed saves ---------------------------------------

def test_writing_onto_a_symbolic_link_replaces_its_target_and_keeps_the_link(tmp_path,
                                                                            project):
    real = tmp_path / "store" / "robin.lagwise"
    real.parent.mkdir()
    real.write_bytes(OLD)
    link = tmp_path / "robin.lagwise"
    try:
        link.symlink_to(real)
    except OSError:
        pytest.skip("this system does not let the user make symbolic links")
    save_project(project, link)
    assert link.is_symlink() and link.resolve() == real.resolve()
    assert open_project(link).spec == project.spec
    write_atomic(link, b"again")
    assert link.is_symlink() and real.read_bytes() == b"again"


def aged(path: Path, seconds: float) -> Path:
    path.write_bytes(b"half a save")
    then = time.time() - seconds
    os.utime(path, (then, then))
    return path


def test_the_next_save_removes_only_old_temporaries_of_the_same_file(tmp_path, project):
    target = tmp_path / "robin.lagwise"
    stale = aged(tmp_path / ".robin.lagwise.0123abcd.tmp", 10 * STALE_SECONDS)
    fresh = aged(tmp_path / ".robin.lagwise.89abcdef.tmp", 0)  # perhaps a save in progress
    other = aged(tmp_path / ".other.lagwise.0123abcd.tmp", 10 * STALE_SECONDS)
    mine = aged(tmp_path / ".robin.lagwise.notes.tmp", 10 * STALE_SECONDS)  # not Lagwise's
    save_project(project, target)
    assert not stale.exists()
    assert fresh.exists() and other.exists() and mine.exists()


def test_removing_stale_temporaries_before_opening(tmp_path):
    target = tmp_path / "robin.lagwise"
    stale = aged(tmp_path / ".robin.lagwise.0123abcd.tmp", 10 * STALE_SECONDS)
    assert remove_stale_temporaries(target) == [stale.resolve()]
    assert list(tmp_path.iterdir()) == []


def test_looking_for_autosaves_removes_old_temporaries_of_killed_autosaves(tmp_path):
    folder = tmp_path / "recovery"
    folder.mkdir()
    stale = aged(folder / ".untitled-4242.lagwise.0123abcd.tmp", 10 * STALE_SECONDS)
    fresh = aged(folder / ".untitled-4243.lagwise.0123abcd.tmp", 0)
    assert find_recoveries(folder) == []
    assert not stale.exists() and fresh.exists()
