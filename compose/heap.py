"""Handing freed memory back to the system during a long walk (glibc's ``malloc_trim``).

The window walk allocates and frees arrays of a few hundred kB to a few MB on several threads
(window planes, reads, encoder buffers). glibc keeps what is freed inside its per-thread
arenas for reuse, and a walk's pattern of sizes leaves much of it unreusable: at 8192 x 8192
px some 200 MB of the process were free memory held by the allocator after the walk (mallinfo2).
:func:`trim` returns free pages to the system; the walk calls it once per window row.
:func:`limit_arenas` lets the threads share :data:`ARENAS` arenas instead of up to eight per core,
each keeping its own freed memory (the render command calls it before its threads start; on the
8192 bench render 0.53 -> 0.49 GB, the same CPU time), and maps blocks of :data:`MMAP_BYTES` or
more on their own (bands of rows, a page's images): glibc otherwise raises its mmap threshold to
the size of the largest block freed (up to 32 MB), so a band-sized array once freed lets the
next ones land in the arenas, where they fragment what the windows' arrays reuse. Fixing the
threshold also fixes glibc's trim threshold, which is set to :data:`TRIM_BYTES` so that freeing
the top of an arena does not give pages back only to fault them in again at the next window
(tried at glibc's default of 128 kB: 4x the system time); :func:`trim` gives them back once per
window row instead. Elsewhere (other C libraries, other systems) these do nothing.

:func:`no_huge_pages` keeps the kernel from backing this process's memory with transparent
huge pages (Linux ``PR_SET_THP_DISABLE``; inherited by the processes it forks): a render's big
arrays (bands of rows, reads, a helper's coverage) live for a window or a band, and with huge
pages every fresh one is faulted in and zeroed 2 MB at a time. On the benchmarks' 2-core virtual
machine (transparent huge pages "always") the 8192 x 8192 bench render's main thread spent
0.23 s zeroing huge pages for its bands alone; without them the render took 0.48 s less CPU
in all its processes (8.43 -> 7.95 s, system time 1.11 -> 0.64 s; medians of 3 alternating;
measured, no source). :func:`limit_arenas` calls it.
"""
from __future__ import annotations

import ctypes
import functools
import os

__all__ = ["libc", "trim", "limit_arenas", "no_huge_pages", "reuse_freed_memory", "ARENAS",
           "MMAP_BYTES", "TRIM_BYTES", "DRAFT_MMAP_BYTES", "DRAFT_TRIM_BYTES"]

#: glibc malloc arenas the threads of a render share (the window threads, the encoders).
ARENAS = 2
#: Blocks of this many bytes or more are mapped on their own and unmapped when freed (a
#: window's planes are 1-3 MB and stay in the arenas; a 4096 px band of rows is 6 MB).
MMAP_BYTES = 4 << 20
#: Free memory at the top of an arena kept until :func:`trim` (bytes).
TRIM_BYTES = 256 << 20
# mallopt parameter numbers (glibc malloc.h)
_M_TRIM_THRESHOLD = -1
_M_MMAP_THRESHOLD = -3
_M_ARENA_MAX = -8
_PR_SET_THP_DISABLE = 41        # Linux <linux/prctl.h>


@functools.lru_cache(maxsize=2)
def libc(use_errno: bool = False):
    """The C library: glibc's file name first (``ctypes.util.find_library`` runs ``ldconfig``
    in a new process, 2-4 ms in every compose process), else whatever that finds; None without
    one."""
    try:
        return ctypes.CDLL("libc.so.6", use_errno=use_errno)
    except OSError:
        pass
    from ctypes.util import find_library

    name = find_library("c")
    try:
        return ctypes.CDLL(name, use_errno=use_errno) if name else None
    except OSError:
        return None


@functools.lru_cache(maxsize=1)
def _malloc_trim():
    try:
        fn = libc().malloc_trim
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


@functools.lru_cache(maxsize=1)
def _mallopt():
    try:
        fn = libc().mallopt
    except AttributeError:      # no C library found, or not glibc
        return None
    fn.argtypes = [ctypes.c_int, ctypes.c_int]
    fn.restype = ctypes.c_int
    return fn


def no_huge_pages() -> bool:
    """No transparent huge pages for this process's memory from now on, nor for the processes
    it forks (Linux ``prctl(PR_SET_THP_DISABLE)``); True if done."""
    import sys

    if not sys.platform.startswith("linux"):
        return False
    try:
        prctl = libc().prctl
    except AttributeError:      # no C library found
        return False
    prctl.restype = ctypes.c_int
    return prctl(_PR_SET_THP_DISABLE, ctypes.c_ulong(1), ctypes.c_ulong(0), ctypes.c_ulong(0),
                 ctypes.c_ulong(0)) == 0


def limit_arenas(arenas: int = ARENAS) -> bool:
    """Let threads started from now on share at most ``arenas`` glibc malloc arenas, unless the
    environment sets ``MALLOC_ARENA_MAX``; map blocks of :data:`MMAP_BYTES` or more on their own
    and keep :data:`TRIM_BYTES` at an arena's top, unless the environment sets
    ``MALLOC_MMAP_THRESHOLD_`` or ``MALLOC_TRIM_THRESHOLD_``; no transparent huge pages
    (:func:`no_huge_pages`). True if the arenas were limited."""
    no_huge_pages()
    mallopt = _mallopt()
    if mallopt is None:
        return False
    if not any(k in os.environ for k in ("MALLOC_MMAP_THRESHOLD_", "MALLOC_TRIM_THRESHOLD_",
                                         "GLIBC_TUNABLES")):
        mallopt(_M_TRIM_THRESHOLD, TRIM_BYTES)
        mallopt(_M_MMAP_THRESHOLD, MMAP_BYTES)
    if "MALLOC_ARENA_MAX" in os.environ:
        return False
    return bool(mallopt(_M_ARENA_MAX, int(arenas)))


#: A draft command's malloc settings (:func:`reuse_freed_memory`): blocks up to this many bytes
#: come from the heap (an array freed there is reused by the next one instead of unmapped and
#: faulted in again)...
DRAFT_MMAP_BYTES = 64 << 20
#: ... and this much free memory at the heap's top is kept for reuse, not given back.
DRAFT_TRIM_BYTES = 256 << 20


def reuse_freed_memory() -> bool:
    """For ``compose check --draft``, a short process of bounded memory (a canvas of at most
    384 px a side, :data:`compose.canvas.DRAFT_SIDE`), and the marks process it forks (which
    inherits them): glibc keeps what the process frees for reuse -- blocks up to
    :data:`DRAFT_MMAP_BYTES` come from the heap, whose top is trimmed only past
    :data:`DRAFT_TRIM_BYTES`, and the threads share one malloc arena instead of one each -- so
    the arrays of a read, a shade or a composite land in memory the ones before freed instead
    of in fresh pages, each a page fault (about 2.8 us of CPU per 4 kB page on the benchmarks'
    virtual machine; measured, no source). Nothing the draft computes depends on it. The
    environment's own settings win (``MALLOC_*``, ``GLIBC_TUNABLES``); without glibc it does
    nothing. True if set."""
    if any(k.startswith("MALLOC_") or k == "GLIBC_TUNABLES" for k in os.environ):
        return False
    mallopt = _mallopt()        # the one typed handle this module keeps
    if mallopt is None:         # no C library found, or not glibc
        return False
    return bool(mallopt(_M_MMAP_THRESHOLD, DRAFT_MMAP_BYTES)
                and mallopt(_M_TRIM_THRESHOLD, DRAFT_TRIM_BYTES)
                and mallopt(_M_ARENA_MAX, 1))
