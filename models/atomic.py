"""Atomic file writing: a file is either wholly replaced or left exactly as it was.

`write_atomic(target, data)` writes the bytes to a new temporary file in the target's own
folder (`.NAME.XXXXXXXX.tmp`), flushes it and syncs it to disk, gives it the target's
permissions, moves it over the target with `os.replace` (one step on every system Lagwise
runs on) and then syncs the folder so the rename itself survives a power cut (not on
Windows, which cannot sync a folder). If anything fails, the temporary file is removed, the
target is untouched and the OSError is raised again for the caller to explain.

A symbolic link is followed: the file it points to is replaced and the link kept. A file
the user made read-only is refused, not replaced. Temporary files of the same target left
by a killed save (older than `STALE_SECONDS`) are removed by the next save
(`remove_stale_temporaries`).

Any writer of a user's file (a project, a JSON result, a CSV table, a PNG picture) should
build the whole content in memory and hand it to `write_atomic`, or to `write_output`, which
turns a failure into one OutputError line.
"""

from __future__ import annotations

import errno
import os
import re
import secrets
import stat
import sys
import time
from pathlib import Path

from lagwise.models.errors import OutputError

STALE_SECONDS = 10.0  # a temporary this old is no save in progress (a save takes well under)


def write_atomic(target: str | Path, data: bytes | str) -> None:
    """Replace `target` by `data` (text is written as UTF-8) in one step (see module docstring).

    Raises OSError (IsADirectoryError when `target` is a folder, PermissionError when it is
    read-only) and leaves `target` as it was, and no temporary file behind, when the content
    cannot be written completely.
    """
    target = Path(os.path.realpath(target))  # through symbolic links: the link is kept
    if isinstance(data, str):
        data = data.encode("utf-8")
    if target.is_dir():
        raise IsADirectoryError(errno.EISDIR, "is a folder", str(target))
    if target.exists() and not os.access(target, os.W_OK):
        raise PermissionError(errno.EACCES, "the file is read-only", str(target))
    remove_stale_temporaries(target)
    temporary = target.with_name(f".{target.name}.{secrets.token_hex(4)}.tmp")
    try:
        flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
        handle = os.open(temporary, flags, 0o666)
        with os.fdopen(handle, "wb") as out:
            out.write(data)
            out.flush()
            os.fsync(out.fileno())
        if target.exists():
            os.chmod(temporary, stat.S_IMODE(target.stat().st_mode))
        os.replace(temporary, target)
    except BaseException:
        try:
            temporary.unlink(missing_ok=True)
        except OSError:
            pass
        raise
    sync_folder(target.parent)


def write_output(target: str | Path, data: bytes | str, what: str) -> Path:
    """`write_atomic` for a file the user named; returns `target`.

    A failure raises OutputError in one line naming the file, `what` it is ("the results",
    "the picture") and the reason, and says whether a previous file is kept unchanged.
    """
    target = Path(target)
    try:
        write_atomic(target, data)
    except OSError as error:
        kept = ("the previous file is unchanged" if target.is_file()
                else "nothing was written")
        raise OutputError(f"{target}: could not write {what} ({failure_reason(error)}); "
                          f"{kept}") from error
    return target


def remove_stale_temporaries(target: str | Path, older_than: float = STALE_SECONDS) -> list[Path]:
    """Delete the temporaries `write_atomic` left beside `target` (a save that was killed)
    that are older than `older_than` seconds; other files are never touched. Returns them."""
    target = Path(os.path.realpath(target))
    pattern = re.compile(rf"\.{re.escape(target.name)}\.[0-9a-f]{{8}}\.tmp")
    removed = []
    try:
        candidates = [p for p in target.parent.iterdir() if pattern.fullmatch(p.name)]
    except OSError:
        return removed
    now = time.time()
    for path in candidates:
        try:
            if path.is_file() and not path.is_symlink() and \
                    now - path.stat().st_mtime > older_than:
                path.unlink()
                removed.append(path)
        except OSError:  # gone already, or not ours to delete
            continue
    return removed


def sync_folder(folder: str | Path) -> None:
    """Make a rename inside `folder` durable where the system allows syncing a folder (not
    Windows); failures are ignored (the file itself is already on disk)."""
    if sys.platform.startswith("win"):
        return
    try:
        handle = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(handle)
    except OSError:
        pass
    finally:
        os.close(handle)


def failure_reason(error: OSError) -> str:
    """Why a write failed, in plain words (a folder, a missing folder, else the system's)."""
    if isinstance(error, IsADirectoryError):
        return "it is a folder"
    if isinstance(error, FileNotFoundError):
        return "the folder does not exist"
    return error.strerror or str(error) or type(error).__name__
