"""Where a command's wall-clock time goes, across its processes and threads (for bench/page.py).

With the environment variable ``COMPOSE_TIMELINE`` naming a file, :func:`span` appends one line
per finished stage to it: ``pid thread start end label`` (wall-clock seconds since the epoch,
so the lines of forked processes line up), written with one ``write`` to a file opened for
appending (lines of several processes do not interleave). Without it :func:`span` does nothing
but check the variable. Never used to decide anything.
"""
from __future__ import annotations

import contextlib
import os
import threading
import time
from collections.abc import Iterator

__all__ = ["span", "note", "enabled", "read"]

_VAR = "COMPOSE_TIMELINE"


def enabled() -> bool:
    """Whether stages are being recorded."""
    return bool(os.environ.get(_VAR))


def note(label: str, start: float, end: float | None = None) -> None:
    """Record ``label`` from ``start`` to ``end`` (``time.time()`` values; end: now)."""
    path = os.environ.get(_VAR)
    if not path:
        return
    end = time.time() if end is None else end
    line = f"{os.getpid()} {threading.current_thread().name.replace(' ', '_')} {start:.6f} {end:.6f} {label}\n"
    fd = os.open(path, os.O_WRONLY | os.O_APPEND | os.O_CREAT, 0o644)
    try:
        os.write(fd, line.encode())
    finally:
        os.close(fd)


@contextlib.contextmanager
def span(label: str) -> Iterator[None]:
    """Record the block's wall-clock span as ``label`` (when recording)."""
    if not os.environ.get(_VAR):
        yield
        return
    t = time.time()
    try:
        yield
    finally:
        note(label, t)


def read(path: str) -> list[tuple[int, str, float, float, str]]:
    """The recorded lines of ``path``: (pid, thread, start, end, label), by start."""
    rows = []
    with open(path, encoding="utf-8") as f:
        for line in f:
            pid, thread, start, end, label = line.rstrip("\n").split(" ", 4)
            rows.append((int(pid), thread, float(start), float(end), label))
    return sorted(rows, key=lambda r: r[2])
