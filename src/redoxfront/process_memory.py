"""Keep freed memory in the process for reuse instead of handing it back at once.

The ranking of a large library allocates and frees arrays of tens of MB many times (one
per block of Monte Carlo draws, per block of scored picks). glibc's malloc serves each such
array by a fresh ``mmap`` and returns it on ``free``, so every block touches new pages and
takes one page fault per page: measured on this project's 2-core VM, the next-experiment
step of 100,000 candidates took about 27,000 page faults and 1 s of system time that way, and
about 1,400 faults and 0.5 s when freed memory stays in the heap (``benchmarks/
rank_command_bench.py`` measures the whole command). Peak memory is unchanged: what is kept
is what the command has already used and will use again.

The tuning is glibc's own, documented in mallopt(3): ``M_MMAP_THRESHOLD`` (requests this large
or larger get their own mapping), ``M_TRIM_THRESHOLD`` (free memory at the top of the heap
above this is given back) and ``M_ARENA_MAX`` (one heap shared by every thread, so the worker
threads of the Monte Carlo reuse each other's blocks). Elsewhere (macOS, musl) nothing changes.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import sys

M_TRIM_THRESHOLD = -1
M_MMAP_THRESHOLD = -3
M_ARENA_MAX = -8
"""mallopt(3) parameter numbers of glibc (malloc.h)."""

MMAP_THRESHOLD_BYTES = 512 * 2**20
"""Only requests of 512 MiB or more get their own mapping (glibc's default is 128 KiB, rising
to at most 32 MiB as blocks are freed)."""
TRIM_THRESHOLD_BYTES = 1024 * 2**20
"""Free memory at the top of the heap is given back only above 1 GiB."""


def keep_freed_memory() -> bool:
    """Tune glibc's malloc as the module docstring says; True when it took effect.

    Call it once, early, in a process that allocates large temporary arrays repeatedly (the
    command line does, for every command). Returns False, changing nothing, where the C
    library is not glibc.
    """
    if not sys.platform.startswith("linux"):
        return False
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        mallopt = libc.mallopt
        libc.gnu_get_libc_version  # only glibc has it  # noqa: B018
    except (OSError, AttributeError):
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    done = [mallopt(M_MMAP_THRESHOLD, MMAP_THRESHOLD_BYTES), mallopt(M_TRIM_THRESHOLD, TRIM_THRESHOLD_BYTES),
            mallopt(M_ARENA_MAX, 1)]
    return all(r == 1 for r in done)
