"""Write-then-rename, so a failure never leaves a half-written output."""
from __future__ import annotations

import contextlib
import ctypes
import ctypes.util
import functools
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from compose.errors import OutputError

__all__ = ["atomic_path", "check_writable", "Writeback"]

_SYNC_FILE_RANGE_WRITE = 2      # Linux <fcntl.h>: start writing dirty pages, do not wait


@functools.lru_cache(maxsize=1)
def _sync_file_range() -> Any:
    try:
        fn = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6",
                         use_errno=True).sync_file_range
    except (OSError, AttributeError):       # not Linux's C library: nothing to do
        return None
    fn.argtypes = [ctypes.c_int, ctypes.c_int64, ctypes.c_int64, ctypes.c_uint]
    fn.restype = ctypes.c_int
    return fn


class Writeback:
    """Start the disk writing of a file being written every ``step`` bytes (Linux
    ``sync_file_range``, SYNC_FILE_RANGE_WRITE: asynchronous), so the fsync that commits the
    outputs finds little left to write: the disk works beside the render instead of after it.
    Elsewhere it does nothing. Call :meth:`wrote` after each write to ``f``."""

    def __init__(self, f, step: int = 16 << 20):
        self._f = f
        self._step = step
        self._done = 0          # bytes handed to the disk so far
        self._fn = _sync_file_range()

    def wrote(self) -> None:
        if self._fn is None:
            return
        end = self._f.tell()
        if end - self._done >= self._step:
            self._f.flush()
            self._fn(self._f.fileno(), self._done, end - self._done, _SYNC_FILE_RANGE_WRITE)
            self._done = end


def check_writable(paths: list[Path], overwrite: bool) -> None:
    """Raise OutputError if any output exists and ``overwrite`` is false (before any work starts)."""
    for p in paths:
        try:
            os.stat(p.parent)
        except FileNotFoundError:
            pass
        except OSError as exc:
            raise OutputError(f"cannot use output folder {p.parent}: {exc.strerror}") from None
        if len(p.name.encode("utf-8", "surrogatepass")) > 240:
            raise OutputError(f"output file name too long: {p.name}")
    if overwrite:
        return
    existing = [str(p) for p in paths if p.exists()]
    if existing:
        raise OutputError(f"output exists (use --overwrite): {', '.join(existing)}")


@contextlib.contextmanager
def atomic_path(final: Path) -> Iterator[Path]:
    """Yield a temporary path beside ``final``; rename it into place when the block succeeds.

    On any exception the temporary file is removed and ``final`` is left as it was.
    """
    final = Path(final)
    try:
        final.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise OutputError(f"cannot create output folder {final.parent}: {exc.strerror}") from None
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{final.name}.", suffix=".part" + final.suffix,
                                   dir=final.parent)
    except OSError as exc:
        raise OutputError(f"cannot write in output folder {final.parent}: {exc.strerror}") from None
    os.close(fd)
    tmp_path = Path(tmp)
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp_path, 0o666 & ~umask)   # mkstemp makes 0600; outputs get the usual mode
    try:
        yield tmp_path
        os.replace(tmp_path, final)
    except BaseException:
        with contextlib.suppress(OSError):
            tmp_path.unlink()
        raise
