"""Atomic file writing: a file is either wholly replaced or left exactly as it was.

`write_atomic(target, data)` writes the bytes to a new temporary file in the target's own
folder (`.NAME.XXXXXXXX.tmp`), flushes it and syncs it to disk, gives it the target's
permissions, moves it over the target with `os.replace` (one step on every system Lagwise
runs on) and then syncs the folder so the rename itself survives a power cut (not on
Windows, which cannot sync a folder). If anything fails, the temporary file is removed, the
target is untouched and the OSError is raised again for the caller to explain.

Any writer of a user's file (a project, a JSON result, a CSV table, a PNG picture) should
build the whole content in memory and hand it to `write_atomic`.
"""

from __future__ import annotations

import errno
import os
import secrets
import stat
import sys
from pathlib import Path


def write_atomic(target: str | Path, data: bytes | str) -> None:
    """Replace `target` by `data` (text is written as UTF-8) in one step (see module docstring).

    Raises OSError (IsADirectoryError when `target` is a folder) and leaves `target` as it
    was, and no temporary file behind, when the content cannot be written completely.
    """
    target = Path(target)
    if isinstance(data, str):
        data = data.encode("utf-8")
    if target.is_dir():
        raise IsADirectoryError(errno.EISDIR, "is a folder", str(target))
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
