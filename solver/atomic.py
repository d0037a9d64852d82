"""Atomic replacement of a file: the one temporary-file-then-rename recipe of knudsweep.

The new content goes to a temporary ``.<name>.<pid>.tmp`` in the target's own
folder (same file system, so the rename is atomic), is flushed to disk with
``fsync`` and then renamed over the target.  A file under its final name is
therefore always complete: a reader sees the old file or the new one, never a
part.  On any error the temporary is removed and the error propagates, so
nothing under the final name changes.  A writer killed between creating and
renaming leaves its temporary behind; :func:`temporary_name` is the pattern the
study layer's clean-up recognises (``knudsweep.status.stray_temporaries``).

Used by the point files (``netcdf_io.write_dataset``) and by every product of
the study layer (batch files, sweep, tables, figures, report pages, status
sidecars).
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable
from pathlib import Path

# ".<final name>.<writer pid>.tmp"
TEMPORARY_NAME = re.compile(r"^\.(?P<final>.+)\.(?P<pid>\d+)\.tmp$")


def temporary_name(path: str | os.PathLike) -> Path:
    """The temporary this process writes before it renames it to ``path``: ``<dir>/.<name>.<pid>.tmp``."""
    path = Path(path)
    return path.with_name(f".{path.name}.{os.getpid()}.tmp")


class atomic_output:
    """``with atomic_output(path) as tmp:`` write the file ``tmp``; on success it replaces ``path``.

    ``fsync=False`` skips the flush to disk: only for caches that are checked
    on every read and rebuilt when they do not match (the status sidecars).
    The target's folder is created if missing.
    """

    def __init__(self, path: str | os.PathLike, *, fsync: bool = True):
        self.path = Path(path)
        self.tmp = temporary_name(self.path)
        self.fsync = fsync

    def __enter__(self) -> Path:
        self.path.parent.mkdir(parents=True, exist_ok=True)
        return self.tmp

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            self.tmp.unlink(missing_ok=True)
            return False
        try:
            if self.fsync:
                with open(self.tmp, "rb") as fh:
                    os.fsync(fh.fileno())
            os.replace(self.tmp, self.path)
        except BaseException:
            self.tmp.unlink(missing_ok=True)
            raise
        return False


def atomic_replace(path: str | os.PathLike, write: Callable[[Path], object], *, fsync: bool = True) -> Path:
    """Call ``write(tmp)`` to write the new content to a temporary, then rename it over ``path``."""
    with atomic_output(path, fsync=fsync) as tmp:
        write(tmp)
    return Path(path)


def atomic_write_text(path: str | os.PathLike, text: str, *, fsync: bool = True) -> Path:
    """Replace ``path`` by a UTF-8 text file holding ``text`` (see :func:`atomic_replace`)."""
    return atomic_replace(path, lambda tmp: tmp.write_text(text, encoding="utf-8"), fsync=fsync)
