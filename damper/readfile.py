"""Read an input file without ever blocking on it.

``open()`` on a FIFO waits for a writer (forever, in a batch job), and a device such as
``/dev/zero`` never ends. Input files are opened non-blocking, checked to be regular
files, and read up to a limit.
"""

from __future__ import annotations

import os
import stat

_KINDS = (
    (stat.S_ISFIFO, "a FIFO (named pipe)"),
    (stat.S_ISCHR, "a character device"),
    (stat.S_ISBLK, "a block device"),
    (stat.S_ISSOCK, "a socket"),
    (stat.S_ISDIR, "a directory"),
)


class NotARegularFile(OSError):
    """The path names a FIFO, a device, a socket or a directory.

    Attributes
    ----------
    kind : str
        What it is, in words (``"a FIFO (named pipe)"``).
    """

    def __init__(self, kind, path):
        super().__init__(f"{path}: is {kind}")
        self.kind = kind


def read_regular_file(path, limit: int) -> bytes:
    """At most `limit` bytes of the regular file `path`.

    Raises
    ------
    FileNotFoundError, IsADirectoryError, PermissionError, OSError
        As ``open`` would.
    NotARegularFile
        A FIFO, device or socket (checked on the opened descriptor, so the file cannot be
        swapped after the check).
    """
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    fd = os.open(os.fspath(path), flags)
    try:
        mode = os.fstat(fd).st_mode
        if stat.S_ISDIR(mode):
            raise IsADirectoryError(21, "Is a directory", os.fspath(path))
        if not stat.S_ISREG(mode):
            kind = next((word for test, word in _KINDS if test(mode)), "not a regular file")
            raise NotARegularFile(kind, os.fspath(path))
        chunks, left = [], limit
        while left > 0:
            chunk = os.read(fd, min(left, 1 << 20))
            if not chunk:
                break
            chunks.append(chunk)
            left -= len(chunk)
        return b"".join(chunks)
    finally:
        os.close(fd)


__all__ = ["NotARegularFile", "read_regular_file"]
