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
Linux with glibc; elsewhere, or with :data:`HEAP_PAD` 0, the allocator is left alone.
"""

from __future__ import annotations

import ctypes
import sys

#: Bytes kept at the heap's top when memory is freed (0: leave the allocator's default).
HEAP_PAD = 64 << 20
_M_TOP_PAD = -2  # glibc's mallopt parameter number
_set = False


def keep_heap() -> None:
    """Keep :data:`HEAP_PAD` bytes at this process's heap top (once; glibc on Linux only)."""
    global _set
    if _set or not HEAP_PAD or not sys.platform.startswith("linux"):
        return
    _set = True
    try:
        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):  # no C library symbols, or no mallopt (not glibc)
        return
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    mallopt.restype = ctypes.c_int
    mallopt(_M_TOP_PAD, int(HEAP_PAD))
