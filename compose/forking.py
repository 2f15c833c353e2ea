"""What every process compose forks from its own (the page process, the drawing helper, the
draft's marks process) shares: whether a fork is safe here, and a child that dies with its
parent, and its end."""
from __future__ import annotations

import os
import signal
import sys
import threading

__all__ = ["can_fork", "die_with_parent", "end_child", "read_exactly"]


def can_fork() -> bool:
    """Whether a process may be forked from this one: Linux (the child dies with its parent) and
    no other thread running (a fork copies locks other threads may hold)."""
    return (sys.platform.startswith("linux") and hasattr(os, "fork")
            and threading.active_count() == 1)


def die_with_parent(parent: int, name: bytes | None = None) -> bool:
    """In a forked child: ask the kernel to kill this process when its parent ends (Linux
    ``prctl(PR_SET_PDEATHSIG)``) and, with ``name``, name it for ``ps``, ``top`` and /proc
    (``PR_SET_NAME``, at most 15 bytes). False when the parent ``parent`` (a pid) ended
    before the request took effect: the caller should end."""
    try:
        import ctypes

        libc = ctypes.CDLL(None, use_errno=True)
        libc.prctl(1, signal.SIGKILL, 0, 0, 0)                      # PR_SET_PDEATHSIG
        if name is not None:
            libc.prctl(15, ctypes.c_char_p(name), 0, 0, 0)          # PR_SET_NAME
    except Exception:       # pragma: no cover - best effort (the pipes' ends end a child too)
        pass
    return os.getppid() == parent


def end_child(pid: int, kill: bool) -> None:
    """Reap the forked child ``pid``, killed first (SIGKILL) when ``kill``; a child already
    ended or reaped is no error."""
    if kill:
        try:
            os.kill(pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    try:
        os.waitpid(pid, 0)
    except ChildProcessError:
        pass


def read_exactly(fd: int, size: int, offset: int | None = None) -> bytes:
    """``size`` bytes from the file descriptor ``fd`` (a pipe a forked process writes, or a file
    it filled): read in turn, or from ``offset`` on (``pread``) when given. Raises EOFError when
    it ends first."""
    parts, got = [], 0
    while got < size:
        part = (os.read(fd, size - got) if offset is None
                else os.pread(fd, size - got, offset + got))
        if not part:
            raise EOFError(f"ended after {got} of {size} bytes")
        parts.append(part)
        got += len(part)
    return b"".join(parts)
