"""Handing freed memory back to the system during a long walk (glibc's ``malloc_trim``).

The window walk allocates and frees arrays of a few hundred kB to a few MB on several threads
(window planes, reads, encoder buffers). glibc keeps what is freed inside its per-thread
arenas for reuse, and a walk's pattern of sizes leaves much of it unreusable: at 8192 x 8192
px some 200 MB of the process were free memory held by the allocator after the walk (mallinfo2).
:func:`trim` returns free pages to the system; the walk calls it once per window row.
:func:`limit_arenas` lets the threads share :data:`ARENAS` arenas instead of up to eight per core,
each keeping its own freed memory (the render command calls it before its threads start; on the
8192 bench render 0.53 -> 0.49 GB, the same CPU time). Elsewhere (other C libraries, other
systems) both do nothing.
"""
from __future__ import annotations

import ctypes
import ctypes.util
import functools
import os

__all__ = ["trim", "limit_arenas", "ARENAS"]

#: glibc malloc arenas the threads of a render share (the window threads, the encoders).
ARENAS = 2
_M_ARENA_MAX = -8           # mallopt parameter number (glibc malloc.h)


@functools.lru_cache(maxsize=1)
def _libc():
    try:
        return ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6")
    except OSError:
        return None


@functools.lru_cache(maxsize=1)
def _malloc_trim():
    try:
        fn = _libc().malloc_trim
    except AttributeError:      # no C library found, or not glibc
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


def limit_arenas(arenas: int = ARENAS) -> bool:
    """Let threads started from now on share at most ``arenas`` glibc malloc arenas, unless the
    environment sets ``MALLOC_ARENA_MAX``; True if set."""
    if "MALLOC_ARENA_MAX" in os.environ:
        return False
    try:
        mallopt = _libc().mallopt
    except AttributeError:
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    mallopt.restype = ctypes.c_int
    return bool(mallopt(_M_ARENA_MAX, int(arenas)))
