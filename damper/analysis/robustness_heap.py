"""The C heap of a process that evaluates a robustness study's blocks.

A block's assessment makes and frees arrays of megabytes many times over (the margins'
intervals, the fit's iterations). With glibc's default settings such arrays are mapped
from the system and given back when freed (or the heap's top is trimmed), so every block
pays page faults on memory it has just released: about a tenth of a study's CPU, as
system time. Keeping :data:`HEAP_PAD` bytes at the heap's top when it grows and when it is
trimmed (glibc's ``M_TOP_PAD``) lets the next arrays be carved from those pages again.
Nothing computed changes (the same operations on the same values); the process keeps up
to that much more memory.

Set once per process, from the first block it evaluates (worker processes included), on
Linux with glibc; elsewhere, or with :data:`HEAP_PAD` 0, the allocator is left alone. It is
also left alone where the kernel backs every process's memory with transparent huge pages
(``[always]`` in :data:`_THP_SETTING`, unless this process turned them off): there the freed
arrays cost few faults to begin with, and a kept top was seen to fault its pages in afresh
or not depending on where the heap happened to lie, so the gain measured with 4 KB pages
cannot be promised.
"""

from __future__ import annotations

import ctypes
import sys

#: Bytes kept at the heap's top when memory is freed (0: leave the allocator's default).
HEAP_PAD = 64 << 20
_M_TOP_PAD = -2  # glibc's mallopt parameter number
_PR_GET_THP_DISABLE = 42  # Linux prctl(2) option: 1 when this process turned huge pages off
_THP_SETTING = "/sys/kernel/mm/transparent_hugepage/enabled"
_set = False


def huge_pages_always(setting: str = _THP_SETTING) -> bool:
    """Whether this process's memory is backed by transparent huge pages without asking.

    Parameters
    ----------
    setting : str
        The kernel's setting file (its chosen mode is in brackets, e.g. ``always [madvise] never``).

    Returns
    -------
    bool
        True when the mode is ``always`` and this process has not turned huge pages off
        (``prctl(PR_SET_THP_DISABLE)``); False when the file cannot be read.
    """
    try:
        with open(setting, encoding="ascii") as handle:
            if "[always]" not in handle.read():
                return False
    except (OSError, UnicodeDecodeError):
        return False
    try:
        return ctypes.CDLL(None).prctl(_PR_GET_THP_DISABLE, 0, 0, 0, 0) != 1
    except (OSError, AttributeError):
        return True


def keep_heap() -> None:
    """Keep :data:`HEAP_PAD` bytes at this process's heap top (once; glibc on Linux only,
    and not where huge pages are always on: :func:`huge_pages_always`)."""
    global _set
    if _set or not HEAP_PAD or not sys.platform.startswith("linux"):
        return
    _set = True
    if huge_pages_always():
        return
    try:
        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):  # no C library symbols, or no mallopt (not glibc)
        return
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    mallopt.restype = ctypes.c_int
    mallopt(_M_TOP_PAD, int(HEAP_PAD))
