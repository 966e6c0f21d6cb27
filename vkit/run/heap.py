"""Freed memory given back to the system: a case's big arrays come and go, its resident size should follow.

With glibc, an array freed by NumPy often stays in the process: the allocator raises its mmap threshold
after each large free (up to 32 MiB), so the next arrays of a few MiB come from the heap, whose free
space is kept, and a thread's arena (the coverage thread, the capture reader) keeps its own. A case of
ten 1920x1080 frames measured 200-300 MiB more resident than it held. :func:`bound_heap` fixes the
threshold so every array past it is its own mapping (returned on free); :func:`trim_heap` hands the free
heap pages back after a phase that made many. Both do nothing where the C library is not glibc.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import functools

__all__ = ["MMAP_THRESHOLD_BYTES", "bound_heap", "trim_heap"]

MMAP_THRESHOLD_BYTES = 1 << 20
"""Allocations of at least this many bytes get a mapping of their own (glibc's default start is 128 KiB,
raised as it goes; fixing it at 1 MiB keeps small arrays on the fast heap path)."""

_M_MMAP_THRESHOLD = -3
"""``mallopt`` parameter number of the mmap threshold (glibc ``malloc.h``); setting it stops the raising."""


@functools.lru_cache(maxsize=1)
def _glibc() -> ctypes.CDLL | None:
    name = ctypes.util.find_library("c")
    try:
        libc = ctypes.CDLL(name) if name else None
    except OSError:
        return None
    return libc if libc is not None and hasattr(libc, "malloc_trim") and hasattr(libc, "mallopt") else None


def bound_heap() -> bool:
    """Fix the allocator's mmap threshold at :data:`MMAP_THRESHOLD_BYTES` in this process; False where it cannot."""
    libc = _glibc()
    return bool(libc is not None and libc.mallopt(_M_MMAP_THRESHOLD, MMAP_THRESHOLD_BYTES))


def trim_heap() -> bool:
    """Give the free pages of every heap arena back to the system; True when some were."""
    libc = _glibc()
    return bool(libc is not None and libc.malloc_trim(0))
