"""Autosave recovery files: where they go, writing them, finding them after a crash.

An autosave is an ordinary project file (written by models.project.store, so atomically and
checked) with one more field, `recovery_of`: the project file it belongs to. It lives in the
user's data folder (`recovery_dir`), named after the project and a hash of its path
(`recovery_path`), so it never touches the project file itself.
"""

from __future__ import annotations

import hashlib
import os
import sys
from dataclasses import dataclass, replace
from pathlib import Path

from lagwise.models.atomic import remove_stale_temporaries
from lagwise.models.errors import ProjectError
from lagwise.models.project.document import SUFFIX, Project, reason
from lagwise.models.project.reader import read_project
from lagwise.models.project.store import write_project


@dataclass(frozen=True, eq=False)
class Recovery:
    """An autosaved copy found after a crash.

    path: the recovery file; recovery_of: the project file it belongs to (None: untitled);
    project: its content, with `file` set to `recovery_of`; modified: when it was written.
    """

    path: Path
    recovery_of: Path | None
    project: Project

    @property
    def modified(self) -> str:
        return self.project.modified


def recovery_dir(base: str | Path | None = None) -> Path:
    """Where autosaves go: `base`, else $LAGWISE_DATA_DIR/recovery, else the user data folder
    (Windows: %LOCALAPPDATA%/Lagwise, macOS: ~/Library/Application Support/Lagwise, other:
    $XDG_DATA_HOME/lagwise or ~/.local/share/lagwise) + /recovery."""
    if base is not None:
        return Path(base)
    override = os.environ.get("LAGWISE_DATA_DIR")
    if override:
        return Path(override) / "recovery"
    home = Path.home()
    if sys.platform.startswith("win"):
        root = Path(os.environ.get("LOCALAPPDATA") or home / "AppData" / "Local") / "Lagwise"
    elif sys.platform == "darwin":
        root = home / "Library" / "Application Support" / "Lagwise"
    else:
        root = Path(os.environ.get("XDG_DATA_HOME") or home / ".local" / "share") / "lagwise"
    return root / "recovery"


def recovery_path(project_file: str | Path | None, base: str | Path | None = None) -> Path:
    """The autosave file of a project: named after the project and a hash of its absolute path;
    an untitled project's autosave is named after this process."""
    folder = recovery_dir(base)
    if project_file is None:
        return folder / f"untitled-{os.getpid()}{SUFFIX}"
    absolute = Path(project_file).absolute()
    tag = hashlib.sha256(str(absolute).encode("utf-8")).hexdigest()[:12]
    return folder / f"{absolute.stem}-{tag}{SUFFIX}"


def write_recovery(project: Project, base: str | Path | None = None) -> Path:
    """Autosave `project` (atomically) to its recovery file; returns that file's path.

    The recovery file belongs to `project.file` (None: an untitled project).
    """
    target = recovery_path(project.file, base)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise ProjectError(f"{target.parent}: cannot create the folder for autosaves "
                           f"({reason(error)})") from error
    write_project(project, target, recovery_of=project.file)
    return target


def find_recovery(project_file: str | Path | None, base: str | Path | None = None
                  ) -> Recovery | None:
    """The readable autosave of `project_file` (None: of this process's untitled project)."""
    path = recovery_path(project_file, base)
    return _recovery(path) if path.is_file() else None


def find_recoveries(base: str | Path | None = None) -> list[Recovery]:
    """Every readable autosave in the recovery folder, newest first (offer them at start-up).

    Unreadable files are left alone and not listed; temporaries of autosaves killed while
    being written (models.atomic) are removed.
    """
    folder = recovery_dir(base)
    if not folder.is_dir():
        return []
    for temporary in folder.glob(f".*{SUFFIX}.*.tmp"):  # autosaves killed while writing
        remove_stale_temporaries(folder / temporary.name[1:].rsplit(".", 2)[0])
    found = [_recovery(path) for path in sorted(folder.glob(f"*{SUFFIX}"))]
    return sorted((r for r in found if r is not None), key=lambda r: r.modified, reverse=True)


def discard_recovery(path: str | Path) -> None:
    """Delete a recovery file (after a save, a restore, or when the user declines it)."""
    try:
        Path(path).unlink(missing_ok=True)
    except OSError as error:
        raise ProjectError(f"{path}: cannot delete the autosave ({reason(error)})") from error


def _recovery(path: Path) -> Recovery | None:
    try:
        project, recovery_of = read_project(path)
    except ProjectError:
        return None
    return Recovery(path=path, recovery_of=recovery_of, project=replace(project, file=recovery_of))
