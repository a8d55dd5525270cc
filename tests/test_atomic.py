"""models.atomic.write_atomic: the target is wholly replaced or left byte-identical, and no
temporary file is left behind, whichever step fails."""

from __future__ import annotations

import os
import stat
import sys

import pytest

from full_disk import fill_disk

from lagwise.models.atomic import write_atomic

OLD = b"the previous content\n"


def test_a_new_file_and_a_replaced_file(tmp_path):
    target = tmp_path / "table.csv"
    write_atomic(target, "a,b\n1,\u00e9\n")
    assert target.read_bytes() == "a,b\n1,\u00e9\n".encode("utf-8")
    write_atomic(target, b"\x89PNG\r\n")
    assert target.read_bytes() == b"\x89PNG\r\n"
    assert [p.name for p in tmp_path.iterdir()] == ["table.csv"]


@pytest.mark.skipif(sys.platform.startswith("win"), reason="POSIX permission bits")
def test_the_replaced_file_keeps_its_permissions(tmp_path):
    target = tmp_path / "result.json"
    target.write_bytes(OLD)
    target.chmod(0o600)
    write_atomic(target, b"{}")
    assert stat.S_IMODE(target.stat().st_mode) == 0o600


def _fail(*args, **kwargs):
    raise OSError(5, "Input/output error")


@pytest.mark.parametrize("step", ["write", "fsync", "chmod", "replace"])
def test_a_failure_at_any_step_leaves_the_old_file_and_no_temporary(tmp_path, monkeypatch, step):
    target = tmp_path / "robin.lagwise"
    target.write_bytes(OLD)
    if step == "write":
        fill_disk(monkeypatch)   # half of the bytes reach the temporary file, then ENOSPC
    else:
        monkeypatch.setattr(os, step, _fail)
    with pytest.raises(OSError):
        write_atomic(target, b"the new content, longer than the old one\n" * 100)
    monkeypatch.undo()
    assert target.read_bytes() == OLD
    assert [p.name for p in tmp_path.iterdir()] == ["robin.lagwise"]


def test_an_interrupted_write_removes_its_temporary_and_passes_the_interrupt_on(tmp_path,
                                                                                 monkeypatch):
    target = tmp_path / "robin.lagwise"
    target.write_bytes(OLD)

    def interrupt(*args, **kwargs):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "replace", interrupt)
    with pytest.raises(KeyboardInterrupt):
        write_atomic(target, b"new")
    monkeypatch.undo()
    assert target.read_bytes() == OLD
    assert [p.name for p in tmp_path.iterdir()] == ["robin.lagwise"]


def test_a_folder_or_a_missing_folder_is_refused_without_writing(tmp_path):
    with pytest.raises(IsADirectoryError):
        write_atomic(tmp_path, b"x")
    with pytest.raises(FileNotFoundError):
        write_atomic(tmp_path / "no such folder" / "a.json", b"x")
    assert list(tmp_path.iterdir()) == []
