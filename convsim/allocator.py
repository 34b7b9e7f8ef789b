"""Give freed memory back to the system: a fixed mmap threshold for glibc's allocator.

glibc serves a large request (above the mmap threshold, 128 KiB at start) with its own
mapping and unmaps it when freed.  But by default the threshold grows to the size of the
largest mapped block freed so far (up to 32 MiB), after which arrays of that size come from
the heap, whose freed pages mostly stay in the process.  A run builds its Stokes operator
from temporaries of tens of MiB, so at 512 x 512 about 90 MiB of freed heap stayed resident
through the rest of the run (peak resident size 939 MiB with the default, 849 MiB with the
threshold fixed; ``benchmarks/memory.py``).  Setting the threshold explicitly turns the
growth off (glibc's mallopt(3) manual page).  Other C libraries: nothing is done.
"""

from __future__ import annotations

import ctypes

__all__ = ["fix_mmap_threshold", "MMAP_THRESHOLD_BYTES"]

#: glibc's starting value, kept fixed (M_MMAP_THRESHOLD in mallopt(3)).
MMAP_THRESHOLD_BYTES = 128 * 1024
_M_MMAP_THRESHOLD = -3          # the parameter's number in glibc's malloc.h
_done = False


def fix_mmap_threshold() -> bool:
    """Fix glibc's mmap threshold at ``MMAP_THRESHOLD_BYTES`` once per process.

    Returns True when glibc accepted it, False elsewhere (musl, macOS, Windows).
    """
    global _done
    if _done:
        return True
    try:
        mallopt = ctypes.CDLL(None).mallopt      # the C library the interpreter runs on
    except (OSError, AttributeError, TypeError):
        return False
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    _done = mallopt(_M_MMAP_THRESHOLD, MMAP_THRESHOLD_BYTES) == 1
    return _done
