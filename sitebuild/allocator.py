"""Keep freed memory for reuse instead of handing it back to the system after every array.

The analysis makes and drops many large arrays (at 10M rows each column copy is 80 MB). By
default glibc's malloc gives every block above a threshold its own fresh mapping and unmaps it
when freed, so the next array of the same size is zero-filled page by page again: on a virtual
machine that costs more than the arithmetic. Measured on the 2-core benchmark machine, a 10M-row
build spent 22 s of system time with the defaults and 9 s with these settings, and its wall time
fell from 72 s to 61 s (see benchmarks/speed.py).

:func:`reuse_freed_memory` sets three documented ``mallopt`` parameters once per process: large
blocks come from the heap (``M_MMAP_MAX`` = 0), freed memory at the top of the heap is kept
(``M_TRIM_THRESHOLD``), and threads share one arena (``M_ARENA_MAX`` = 1), since the threads'
own arenas would map their large blocks afresh. It changes how memory is reused, never what is
computed. On a C library without ``mallopt`` (not glibc) it does nothing.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import functools
import sys

# From glibc's <malloc.h>.
M_TRIM_THRESHOLD = -1
M_MMAP_MAX = -4
M_ARENA_MAX = -8
KEEP_BYTES = 2**31 - 1  # free memory at the heap's top beyond this (2 GB) goes back


@functools.cache
def reuse_freed_memory() -> bool:
    """Ask glibc's malloc to reuse freed memory (see the module text); True when it took."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        mallopt = libc.mallopt
    except (OSError, AttributeError):
        return False
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    mallopt.restype = ctypes.c_int
    settings = ((M_ARENA_MAX, 1), (M_MMAP_MAX, 0), (M_TRIM_THRESHOLD, KEEP_BYTES))
    return all(mallopt(param, value) == 1 for param, value in settings)
