"""Run directories and atomic file writes.

A run directory is never overwritten silently: :func:`prepare_run_dir`
refuses a non-empty directory unless ``force`` is given. Every file is written
to a temporary name in the same directory and renamed into place, so an
interrupted run never leaves a half-written table.
"""

from __future__ import annotations

import os
import tempfile

from ..errors import RunDirectoryError


def prepare_run_dir(path, force=False) -> str:
    """Create `path` for a new run.

    Raises
    ------
    RunDirectoryError
        If `path` exists and is not empty (and `force` is False), or is a file.
    """
    path = os.fspath(path)
    if os.path.exists(path):
        if not os.path.isdir(path):
            raise RunDirectoryError(f"{path}: exists and is not a directory")
        if os.listdir(path) and not force:
            raise RunDirectoryError(
                f"{path}: holds an earlier run; choose another --out or add --force to replace its files"
            )
    os.makedirs(path, exist_ok=True)
    return path


def write_atomic(path, data) -> str:
    """Write `data` (str or bytes) to `path` atomically (temporary file, fsync, rename)."""
    path = os.fspath(path)
    directory = os.path.dirname(os.path.abspath(path))
    os.makedirs(directory, exist_ok=True)
    mode = "wb" if isinstance(data, (bytes, bytearray)) else "w"
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", dir=directory)
    try:
        with os.fdopen(fd, mode, **({} if mode == "wb" else {"encoding": "utf-8", "newline": "\n"})) as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)  # mkstemp makes 0600; give the usual file mode
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return path
