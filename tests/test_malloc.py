"""maskprep's own processes keep freed memory for reuse (`maskprep._malloc`)."""

from __future__ import annotations

import platform
import subprocess
import sys

import pytest

from maskprep._malloc import reuse_freed_memory

GLIBC = sys.platform.startswith("linux") and platform.libc_ver()[0] == "glibc"

# Allocate and free a batch's worth of 2 MB arrays 50 times; count the page faults.
_FAULTS = """
import resource, sys
import numpy as np
if sys.argv[1] == "reuse":
    from maskprep._malloc import reuse_freed_memory
    assert reuse_freed_memory()
before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
for _ in range(50):
    parts = [np.ones(1 << 18) for _ in range(8)]  # 8 arrays of 2 MiB, freed each round
    del parts
print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
"""


def _faults(mode: str) -> int:
    out = subprocess.run([sys.executable, "-c", _FAULTS, mode], check=True, capture_output=True,
                         text=True)
    return int(out.stdout)


@pytest.mark.skipif(not GLIBC, reason="mallopt thresholds are glibc's")
def test_freed_blocks_are_reused_instead_of_faulted_in_again() -> None:
    # Source: glibc's mallopt(3) manual page: blocks above M_MMAP_THRESHOLD are mmap()ed and
    # unmapped on free; raising it (and M_TRIM_THRESHOLD) keeps them in the heap for reuse.
    default, reuse = _faults("default"), _faults("reuse")
    assert reuse * 5 < default, (reuse, default)


def test_off_glibc_nothing_is_claimed() -> None:
    assert reuse_freed_memory() is GLIBC
