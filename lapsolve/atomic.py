"""Atomic file output: write to a temporary file in the same folder, fsync, rename.

A reader never sees a half-written file: either the old content or the new.

Temporary files are named ``.NAME.<pid>.<random>.part.EXT`` after the process that
writes them. Every write first calls :func:`sweep` on its folder, which removes the
temporary files of processes that no longer run (a run killed with SIGKILL leaves
no debris beyond the next write) and completes the commit of an
:class:`OutputSet` that was killed while renaming its files (its journal
``.lapsolve-commit.<pid>.<random>.json`` lists the renames; every file in it was
already complete and fsynced).
"""

import contextlib
import json
import logging
import os
import re
import tempfile
from pathlib import Path

from .errors import InputError

log = logging.getLogger(__name__)

#: Temporary names: ``.NAME.<pid>.<random>.part`` plus the final extension.
_TEMP = re.compile(r"^\..+\.(?P<pid>\d+)\.[A-Za-z0-9_]+\.part(\.[^.]*)?$")
#: Commit journals of output sets: ``.lapsolve-commit.<pid>.<random>.json``.
_JOURNAL = re.compile(r"^\.lapsolve-commit\.(?P<pid>\d+)\.[A-Za-z0-9_]+\.json$")
_JOURNAL_PREFIX = ".lapsolve-commit."


def _pid_alive(pid):
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OSError):
        return True  # exists but belongs to someone else (or cannot tell): keep its files
    return True


def sweep(folder):
    """Clean up after writers in ``folder`` that died (SIGKILL, power loss).

    First completes every commit journal of a dead process (its renames are
    replayed; the files were complete before the journal was written), then
    removes temporary files whose writer is no longer running. Files of live
    processes are never touched.

    Returns
    -------
    list of Path
        The files removed or renamed into place.
    """
    folder = Path(folder)
    touched = []
    try:
        names = sorted(os.listdir(folder))
    except OSError:
        return touched
    for name in names:
        match = _JOURNAL.match(name)
        if match and not _pid_alive(int(match["pid"])):
            touched += _roll_forward(folder / name)
    for name in names:
        match = _TEMP.match(name)
        if match and not _pid_alive(int(match["pid"])):
            with contextlib.suppress(FileNotFoundError, IsADirectoryError, PermissionError):
                os.unlink(folder / name)
                touched.append(folder / name)
                log.debug("removed %s, left by a writer that no longer runs", folder / name)
    return touched


def _roll_forward(journal):
    done = []
    try:
        pairs = json.loads(journal.read_text(encoding="utf-8"))["renames"]
    except (OSError, ValueError, KeyError, TypeError):
        pairs = []  # a journal is complete before it gets its name; this one is foreign
    folder = journal.parent
    for tmp, dest in pairs:
        tmp, dest = folder / Path(tmp).name, folder / Path(dest).name
        with contextlib.suppress(FileNotFoundError):
            os.replace(tmp, dest)
            done.append(dest)
    _fsync_dir(folder)
    with contextlib.suppress(FileNotFoundError):
        os.unlink(journal)
    if done:
        log.info("completed an interrupted commit in %s: %s", folder,
                 ", ".join(p.name for p in done))
    return done


def _output_error(exc, where):
    """An :class:`InputError` for an output that cannot be written (no folder, read-only,
    disk full): a problem of the request or the machine, not a bug."""
    if isinstance(exc, (FileExistsError, NotADirectoryError)):
        reason = "a part of the path is a file, not a folder"
    else:
        reason = exc.strerror or type(exc).__name__
    return InputError(f"cannot write output: {reason}", source=str(where))


def _umask():
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    mask = os.umask(0o022)  # no /proc: read it by setting it (briefly)
    os.umask(mask)
    return mask


def _temp_name(folder, name):
    """A new empty temporary file for ``name`` in ``folder`` (exclusive create).

    It gets the permissions an ordinary new file would get (mkstemp's are 0600).
    """
    fd, tmp = tempfile.mkstemp(prefix=f".{name}.{os.getpid()}.",
                               suffix=".part" + Path(name).suffix, dir=folder)
    try:
        os.fchmod(fd, 0o666 & ~_umask())
    except (OSError, AttributeError):
        pass
    finally:
        os.close(fd)
    return Path(tmp)


def _fsync_file(path):
    with open(path, "rb+") as fh:
        fh.flush()
        os.fsync(fh.fileno())


@contextlib.contextmanager
def atomic_path(path):
    """Yield a temporary path beside ``path``; rename it over ``path`` on success.

    Use for writers that insist on a file name (meshio, matplotlib). On any
    exception the temporary file is removed and ``path`` is left untouched.
    """
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        sweep(path.parent)
        tmp = _temp_name(path.parent, path.name)
    except OSError as exc:
        raise _output_error(exc, path) from None
    try:
        yield tmp
        _fsync_file(tmp)
        os.replace(tmp, path)
        _fsync_dir(path.parent)
    except BaseException as exc:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise _output_error(exc, path) from None
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
    fsyncs them, records the renames in a journal, renames them all and removes
    the journal. A process killed during the renames leaves the journal, and the
    next write in the folder (:func:`sweep`) finishes the renames: readers then
    see the complete new set. Leaving the ``with`` block on an exception removes
    the temporary files (and the folder, when this set created it and it is empty).
    """

    def __init__(self, folder):
        self.folder = Path(folder)
        self._pending = []
        self._created = False
        self._swept = False
        self._journaled = False

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            if not self._journaled:
                self.discard()
            if issubclass(exc_type, OSError):
                raise _output_error(exc, self.folder) from None
        return False

    def path(self, name):
        """A temporary path to write ``name`` into; it becomes ``folder/name`` on commit."""
        if Path(name).name != name or name in ("", ".", ".."):
            raise ValueError(f"an output name is a plain file name, got {name!r}")
        try:
            if not self.folder.exists():
                self.folder.mkdir(parents=True)
                self._created = True
            if not self._swept:
                sweep(self.folder)
                self._swept = True
            tmp = _temp_name(self.folder, name)
        except OSError as exc:
            raise _output_error(exc, self.folder) from None
        self._pending.append((tmp, self.folder / name))
        return tmp

    def text(self, name, text):
        self.path(name).write_text(text, encoding="utf-8")

    def bytes(self, name, data):
        self.path(name).write_bytes(data)

    def commit(self):
        """fsync every file, then rename them into place; returns the final paths."""
        try:
            return self._commit()
        except OSError as exc:
            if not self._journaled:  # else the next writer's sweep completes the renames
                self.discard()
            raise _output_error(exc, self.folder) from None

    def _commit(self):
        for tmp, _ in self._pending:
            _fsync_file(tmp)
        journal = None
        if len(self._pending) > 1:
            journal = self._journal()
            self._journaled = True
        final = []
        for tmp, dest in self._pending:
            os.replace(tmp, dest)
            final.append(dest)
        _fsync_dir(self.folder)
        if journal is not None:
            os.unlink(journal)
        self._pending = []
        self._journaled = False
        return final

    def _journal(self):
        """Write the list of renames under its final name (itself atomically)."""
        text = json.dumps({"renames": [[t.name, d.name] for t, d in self._pending]})
        tmp = _temp_name(self.folder, "lapsolve-commit.json")
        with open(tmp, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        fd, journal = tempfile.mkstemp(prefix=f"{_JOURNAL_PREFIX}{os.getpid()}.",
                                       suffix=".json", dir=self.folder)
        os.close(fd)
        os.replace(tmp, journal)
        _fsync_dir(self.folder)
        return Path(journal)

    def discard(self):
        for tmp, _ in self._pending:
            with contextlib.suppress(FileNotFoundError):
                os.unlink(tmp)
        self._pending = []
        if self._created:
            with contextlib.suppress(OSError):
                self.folder.rmdir()
