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


class OutputSet:
    """Files that appear together or not at all.

    Each file is written to a temporary name in the target folder; :meth:`commit`
    renames them all. Leaving the ``with`` block on an exception removes the
    temporary files (and the folder, when this set created it and it is empty).
    """

    def __init__(self, folder):
        self.folder = Path(folder)
        self._pending = []
        self._created = False

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            self.discard()
        return False

    def path(self, name):
        """A temporary path to write ``name`` into; it becomes ``folder/name`` on commit."""
        if not self.folder.exists():
            self.folder.mkdir(parents=True)
            self._created = True
        fd, tmp = tempfile.mkstemp(prefix=f".{name}.", suffix=".part" + Path(name).suffix,
                                   dir=self.folder)
        os.close(fd)
        self._pending.append((Path(tmp), self.folder / name))
        return Path(tmp)

    def text(self, name, text):
        self.path(name).write_text(text, encoding="utf-8")

    def bytes(self, name, data):
        self.path(name).write_bytes(data)

    def commit(self):
        """fsync every file, then rename them into place; returns the final paths."""
        for tmp, _ in self._pending:
            with open(tmp, "rb+") as fh:
                os.fsync(fh.fileno())
        final = []
        for tmp, dest in self._pending:
            os.replace(tmp, dest)
            final.append(dest)
        _fsync_dir(self.folder)
        self._pending = []
        return final

    def discard(self):
        for tmp, _ in self._pending:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(tmp)
        self._pending = []
        if self._created:
            with contextlib.suppress(OSError):
                self.folder.rmdir()
