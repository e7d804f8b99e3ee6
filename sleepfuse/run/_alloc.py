"""Allocator tuning for the batch workers (glibc only; a no-op anywhere else).

Scoring one participant allocates and frees dozens of arrays of a few hundred
kB. glibc serves each of those with a fresh ``mmap`` and returns it on
``free``, so every array costs its page faults again (0.6-1.1 ms of a ~9 ms
participant, benchmarks/bench_fast_paths.py; about 8% of the CPU of a whole
``sleepfuse batch --workers 2`` of the 200-participant cohort). Raising the mmap and
trim thresholds keeps freed blocks in the heap for reuse. Peak memory is
unchanged in kind: it is the largest participant's working set, which the
process would touch anyway; it does not grow with the number of participants.
Set ``SLEEPFUSE_MALLOC_TUNING=0`` to leave the allocator alone.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import os
import sys

_M_TRIM_THRESHOLD = -1  # mallopt parameters from glibc's malloc.h
_M_MMAP_THRESHOLD = -3
_MMAP_THRESHOLD = 64 << 20  # blocks up to 64 MB come from the heap
_TRIM_THRESHOLD = 128 << 20  # keep up to 128 MB of free heap for reuse
_done = False


def tune_allocator() -> bool:
    """Apply the thresholds once per process; True if glibc accepted them."""
    global _done
    if _done:
        return True
    if not sys.platform.startswith("linux") or os.environ.get("SLEEPFUSE_MALLOC_TUNING", "1") == "0":
        return False
    try:  # the glibc soname first: find_library would start a subprocess (ldconfig) to look for it
        libc = ctypes.CDLL("libc.so.6")
    except OSError:
        try:
            libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so")
        except OSError:
            return False
    mallopt = getattr(libc, "mallopt", None)
    if mallopt is None:  # not glibc (musl, ...): nothing to tune
        return False
    mallopt.argtypes = (ctypes.c_int, ctypes.c_int)
    mallopt.restype = ctypes.c_int
    _done = bool(mallopt(_M_MMAP_THRESHOLD, _MMAP_THRESHOLD)) and bool(mallopt(_M_TRIM_THRESHOLD, _TRIM_THRESHOLD))
    return _done
