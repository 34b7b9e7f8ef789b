"""Freed heap memory goes back to the system after ``release_freed_memory`` (glibc only).

The check (glibc's documented behaviour, mallopt(3) and malloc_trim(3)): free one 16 MiB
array, which raises the mmap threshold to 16 MiB; then allocate 96 arrays of 1 MiB, keep the
last and free the rest.  They came from the heap, below a live block, and stay resident until
the heap is trimmed.
"""

import subprocess
import sys

import pytest

SCRIPT = """
import re, sys
import numpy as np
def resident_mib():
    text = open("/proc/self/status").read()
    return int(re.search(r"VmRSS:\\s+(\\d+)", text).group(1)) / 1024
big = np.ones(2 * 1024 * 1024)
del big
before = resident_mib()
blocks = [np.ones(128 * 1024) for _ in range(96)]
last = blocks[-1]
del blocks
if sys.argv[1] == "release":
    from convsim.allocator import release_freed_memory
    assert release_freed_memory()
print(resident_mib() - before)
"""


def _retained_mib(mode: str) -> float:
    done = subprocess.run([sys.executable, "-c", SCRIPT, mode], capture_output=True, text=True,
                          check=True)
    return float(done.stdout)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc's mallopt (Linux)")
def test_release_returns_the_freed_heap():
    kept, released = _retained_mib("keep"), _retained_mib("release")
    assert kept > 60.0, "the allocator no longer keeps them: the test lost its point"
    assert released < 10.0
