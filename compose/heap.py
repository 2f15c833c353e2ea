"""Handing freed memory back to the system during a long walk (glibc's ``malloc_trim``).

The window walk allocates and frees arrays of a few hundred kB to a few MB on several threads
(window planes, reads, encoder buffers). glibc keeps what is freed inside its per-thread
arenas for reuse, and a walk's pattern of sizes leaves much of it unreusable: at 8192 x 8192
px some 200 MB of the process were free memory held by the allocator after the walk (mallinfo2).
:func:`trim` returns free pages to the system; the walk calls it once per window row. Elsewhere
(other C libraries, other systems) it does nothing.
"""
from __future__ import annotations

import ctypes
import ctypes.util
import functools

__all__ = ["trim"]


@functools.lru_cache(maxsize=1)
def _malloc_trim():
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
        fn = libc.malloc_trim
    except (OSError, AttributeError):
        return None
    fn.argtypes = [ctypes.c_size_t]
    fn.restype = ctypes.c_int
    return fn


def trim() -> bool:
    """Return the allocator's free memory to the system where it can (glibc); True if done."""
    fn = _malloc_trim()
    if fn is None:
        return False
    fn(0)
    return True
