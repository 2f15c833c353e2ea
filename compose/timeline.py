"""Where a command's wall-clock time goes, across its processes and threads (for bench/page.py).

With the environment variable ``COMPOSE_TIMELINE`` naming a file, :func:`span` appends one line
per finished stage to it: ``pid thread start end cpu label`` (wall-clock seconds since the
epoch, so the lines of forked processes line up; ``cpu``: the CPU seconds the recording thread
spent in the stage, -1 when unknown), written with one ``write`` to a file opened for
appending (lines of several processes do not interleave). Without it :func:`span` does nothing
but check the variable. Never used to decide anything.
"""
from __future__ import annotations

import contextlib
import os
import threading
import time
from collections.abc import Iterator

__all__ = ["span", "note", "note_process", "enabled", "read"]

_VAR = "COMPOSE_TIMELINE"


def enabled() -> bool:
    """Whether stages are being recorded."""
    return bool(os.environ.get(_VAR))


def note(label: str, start: float, end: float | None = None, cpu: float = -1.0) -> None:
    """Record ``label`` from ``start`` to ``end`` (``time.time()`` values; end: now); ``cpu``:
    the thread's CPU seconds in it (-1: unknown)."""
    path = os.environ.get(_VAR)
    if not path:
        return
    end = time.time() if end is None else end
    thread = threading.current_thread().name.replace(' ', '_')
    line = f"{os.getpid()} {thread} {start:.6f} {end:.6f} {cpu:.6f} {label}\n"
    fd = os.open(path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
    try:
        os.write(fd, line.encode())
    finally:
        os.close(fd)


def note_process(label: str = "process cpu") -> None:
    """Record this process's own CPU seconds so far (user + system, children not included) as
    ``label``, a span from the process's last note to now (called just before it ends)."""
    if not os.environ.get(_VAR):
        return
    t = os.times()
    note(label, time.time(), cpu=t.user + t.system)


@contextlib.contextmanager
def span(label: str) -> Iterator[None]:
    """Record the block's wall-clock span as ``label`` (when recording)."""
    if not os.environ.get(_VAR):
        yield
        return
    t, c = time.time(), time.thread_time()
    try:
        yield
    finally:
        note(label, t, cpu=time.thread_time() - c)


def read(path: str) -> list[tuple[int, str, float, float, str, float]]:
    """The recorded lines of ``path``: (pid, thread, start, end, label, cpu seconds), by
    start."""
    rows = []
    with open(path, encoding="utf-8") as f:
        for line in f:
            pid, thread, start, end, cpu, label = line.rstrip("\n").split(" ", 5)
            rows.append((int(pid), thread, float(start), float(end), label, float(cpu)))
    return sorted(rows, key=lambda r: r[2])
