"""Freed memory goes back to the system once ``fix_mmap_threshold`` has run (glibc only).

The check (common practice for glibc's allocator, mallopt(3)): free one 16 MiB array, which
by default raises the mmap threshold to 16 MiB; then allocate 96 arrays of 1 MiB, keep
the last and free the rest.  Without the fix they come from the heap, below a live block,
and stay resident; with it each is its own mapping and is returned when freed.
"""

import subprocess
import sys

import pytest

SCRIPT = """
import re, sys
import numpy as np
if sys.argv[1] == "fix":
    from convsim.allocator import fix_mmap_threshold
    assert fix_mmap_threshold()
def resident_mib():
    text = open("/proc/self/status").read()
    return int(re.search(r"VmRSS:\\s+(\\d+)", text).group(1)) / 1024
big = np.ones(2 * 1024 * 1024)
del big
before = resident_mib()
blocks = [np.ones(128 * 1024) for _ in range(96)]
last = blocks[-1]
del blocks
print(resident_mib() - before)
"""


def _retained_mib(mode: str) -> float:
    done = subprocess.run([sys.executable, "-c", SCRIPT, mode], capture_output=True, text=True,
                          check=True)
    return float(done.stdout)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc's mallopt (Linux)")
def test_fixed_threshold_returns_freed_arrays():
    without, fixed = _retained_mib("default"), _retained_mib("fix")
    assert without > 60.0, "the default allocator no longer keeps them: the test lost its point"
    assert fixed < 10.0
