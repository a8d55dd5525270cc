"""A full disk for models.atomic.write_atomic only: writing its temporary file fails with
ENOSPC after half of the bytes, as a real full disk does; every other file opens normally."""

from __future__ import annotations

import errno
import os
import re

_TEMPORARY = re.compile(r"\..+\.[0-9a-f]{8}\.tmp")


class _HalfWritten:
    """The temporary file's handle: half of the data reaches it, then ENOSPC."""

    def __init__(self, handle: int) -> None:
        self.handle = handle

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        os.close(self.handle)
        return False

    def write(self, data):
        os.write(self.handle, data[: len(data) // 2])
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


def fill_disk(monkeypatch) -> None:
    """From now on (until monkeypatch undoes it) every write_atomic runs out of space."""
    real_open, real_fdopen = os.open, os.fdopen
    temporaries: set[int] = set()

    def open_(path, flags, *args, **kwargs):
        handle = real_open(path, flags, *args, **kwargs)
        if _TEMPORARY.fullmatch(os.path.basename(os.fspath(path))):
            temporaries.add(handle)
        return handle

    def fdopen(handle, *args, **kwargs):
        if handle in temporaries:
            temporaries.discard(handle)
            return _HalfWritten(handle)
        return real_fdopen(handle, *args, **kwargs)

    monkeypatch.setattr(os, "open", open_)
    monkeypatch.setattr(os, "fdopen", fdopen)
