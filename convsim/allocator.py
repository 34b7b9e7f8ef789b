"""Give the memory freed while a run is built back to the system (glibc's malloc_trim).

glibc serves a large request (above its mmap threshold, 128 KiB at start) with its own
mapping and unmaps it when freed.  But the threshold grows to the size of the largest mapped
block freed so far (up to 32 MiB), after which arrays of that size come from the heap, whose
freed pages mostly stay in the process.  Building the Stokes operator frees temporaries of
tens of MiB, so at 512 x 512 about 90 MiB of freed heap stayed resident through the factor
and the rest of the run.  One ``malloc_trim(0)`` after the build hands those pages back
(glibc's malloc_trim(3): free pages anywhere in the heap, not only at its top).

Why not fix the threshold instead (mallopt(3), M_MMAP_THRESHOLD): measured in session 6,
128 KiB fixed gave the same saving, but every field-sized array then became a fresh mapping,
and steps slowed by 35 % at 128 x 128 (aspect 2) and 85 % at 512 x 512 with 1 MiB
(``DEVELOPERS.md``, "Memory at large grids").  Other C libraries: nothing is done.
"""

from __future__ import annotations

import ctypes

__all__ = ["release_freed_memory"]


def release_freed_memory() -> bool:
    """Return the heap's free pages to the system; True when glibc did it (or had none)."""
    try:
        trim = ctypes.CDLL(None).malloc_trim      # the C library the interpreter runs on
    except (OSError, AttributeError, TypeError):
        return False
    trim.argtypes = (ctypes.c_size_t,)
    trim(0)
    return True
