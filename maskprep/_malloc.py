"""Memory reuse in maskprep's own processes: freed blocks of a few megabytes stay in the heap.

The stages allocate many short-lived numpy arrays of one to a few megabytes per batch.
glibc's malloc serves such blocks from fresh ``mmap`` pages and unmaps them when they are
freed, so every batch pays the kernel again to fault in and zero the pages of all its
temporaries (on `maskprep mask`, about a fifth of the CPU time, all of it in the kernel).
`reuse_freed_memory` raises malloc's two thresholds so that blocks up to 32 MiB come from
the heap and freed memory is kept for the next batch unless more than 256 MiB of it lies
free at the top. Peak memory is unchanged (the same blocks are live at once); only the
return of freed memory to the system comes later. Outputs do not depend on it.

Only the command line (`maskprep.cli.main`) and the local pool's workers call it: importing
maskprep as a library leaves the allocator of the caller's process alone. It does nothing
where the C library has no glibc ``mallopt`` (macOS, musl).
"""

from __future__ import annotations

import sys

__all__ = ["reuse_freed_memory"]

_M_TRIM_THRESHOLD = -1  # glibc's mallopt parameter numbers (malloc.h)
_M_MMAP_THRESHOLD = -3
MMAP_THRESHOLD = 32 << 20  # the largest value glibc accepts on 64-bit systems
TRIM_THRESHOLD = 256 << 20


def reuse_freed_memory() -> bool:
    """Set the thresholds in this process; True when the C library took them.

    >>> reuse_freed_memory() in (True, False)
    True
    """
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes

        mallopt = ctypes.CDLL(None).mallopt
    except (OSError, AttributeError):  # no glibc
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    return bool(mallopt(_M_MMAP_THRESHOLD, MMAP_THRESHOLD)) and bool(
        mallopt(_M_TRIM_THRESHOLD, TRIM_THRESHOLD)
    )
