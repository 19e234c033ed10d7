"""Atomic file writes, recorded in the active run's journal; output-location errors.

Every file is written to a temporary name in its own directory, flushed to disk and
renamed into place, so an interrupted run never leaves a half-written table. Inside a
run directory (:mod:`damper.output.rundir`) the file and its temporary name are recorded
in the journal *before* anything is created, and the file's SHA-256 once it is in place.

Any OS error on the output path (disk full, file-size limit, read-only file system,
permission, a path through a file) becomes an :class:`OutputError`: the user's problem,
reported in one line with exit code 2; the files written before it are kept.
"""

from __future__ import annotations

import errno
import hashlib
import itertools
import os

from ..errors import OutputError
from . import journal

#: The user's words for the usual OS errors on an output path.
_REASONS = {
    errno.ENOSPC: "the disk is full",
    errno.EDQUOT: "the disk quota is used up",
    errno.EFBIG: "the file is larger than the file system or the file-size limit allows",
    errno.EROFS: "the file system is read-only",
    errno.EACCES: "permission denied",
    errno.EPERM: "not permitted",
    errno.ENOTDIR: "a part of the path is a file, not a directory",
    errno.EISDIR: "it is a directory",
    errno.ENAMETOOLONG: "the name is too long",
    errno.ENOENT: "a directory on the way does not exist or cannot be created here",
    errno.EEXIST: "something else already has this name",
    errno.ELOOP: "too many symbolic links on the way",
    errno.EIO: "input/output error",
}

_COUNTER = itertools.count(1)


def output_error(exc: OSError, path, doing="cannot write") -> OutputError:
    """An :class:`OutputError` naming `path`, what failed and why, in one line."""
    reason = _REASONS.get(exc.errno, "the system refused")
    detail = exc.strerror or type(exc).__name__
    full = exc.errno in (errno.ENOSPC, errno.EDQUOT, errno.EFBIG)
    kept = "; the files written before it are kept" if full else ""
    advice = "free space or choose another output location" if full else "choose another output location"
    return OutputError(f"{os.fspath(path)}: {doing}: {reason} ({detail}){kept}; {advice}")


def write_atomic(path, data) -> str:
    """Write `data` (str or bytes) to `path` atomically (temporary file, fsync, rename).

    Inside the active run directory the write is journaled (see module docstring).

    Raises
    ------
    OutputError
        Any OS error on the way (the temporary file is removed).
    """
    path = os.fspath(path)
    if isinstance(data, str):
        data = data.encode("utf-8")
    directory = os.path.dirname(os.path.abspath(path))
    tmp = os.path.join(directory, f".tmp-{os.getpid()}-{next(_COUNTER)}")
    run = journal.active()
    rel = journal.relative(run[0], path) if run else None
    created = False
    try:
        if rel is not None:
            _record_directories(run, directory)
            journal.append(run[1], {"write": rel, "tmp": journal.relative(run[0], tmp), "part": run[2]})
        os.makedirs(directory, exist_ok=True)
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)  # the umask applies
        created = True
        try:
            view = memoryview(data)
            while view:
                view = view[os.write(fd, view):]
            os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, path)
        created = False
        if rel is not None:
            sha = hashlib.sha256(data).hexdigest()
            journal.append(run[1], {"done": rel, "sha256": sha, "bytes": len(data), "part": run[2]})
    except OSError as exc:
        if created:
            try:
                os.unlink(tmp)
            except OSError:
                pass
        raise output_error(exc, path) from None
    except BaseException:
        if created:
            try:
                os.unlink(tmp)
            except OSError:
                pass
        raise
    return path


def _record_directories(run, directory):
    """Journal each directory between the run's root and `directory` that does not exist yet."""
    root, journal_path, _ = run
    missing = []
    d = directory
    while not os.path.isdir(d):
        rel = journal.relative(root, d)
        if rel is None:
            break
        missing.append(rel)
        d = os.path.dirname(d)
    for rel in reversed(missing):
        journal.append(journal_path, {"dir": rel})


__all__ = ["OutputError", "output_error", "write_atomic"]
