"""Atomic file output: write to a temporary file in the same folder, fsync, rename.

A reader never sees a half-written file: either the old content or the new.
"""

import contextlib
import os
import tempfile
from pathlib import Path


@contextlib.contextmanager
def atomic_path(path):
    """Yield a temporary path beside ``path``; rename it over ``path`` on success.

    Use for writers that insist on a file name (meshio, matplotlib). On any
    exception the temporary file is removed and ``path`` is left untouched.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part" + path.suffix,
                               dir=path.parent)
    os.close(fd)
    try:
        yield Path(tmp)
        with open(tmp, "rb+") as fh:
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
        _fsync_dir(path.parent)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise


def write_text(path, text):
    """Write ``text`` (UTF-8) to ``path`` atomically."""
    write_bytes(path, text.encode("utf-8"))


def write_bytes(path, data):
    """Write ``data`` to ``path`` atomically."""
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            fh.write(data)


def _fsync_dir(folder):
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)
