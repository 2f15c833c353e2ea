"""Write-then-rename, so a failure never leaves a half-written output."""
from __future__ import annotations

import contextlib
import ctypes
import errno
import functools
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np

from compose.errors import OutputError

__all__ = ["atomic_path", "check_writable", "DirectFile", "DIRECT_BYTES"]

_SYNC_FILE_RANGE_WRITE = 2      # Linux <fcntl.h>: start writing dirty pages, do not wait


@functools.lru_cache(maxsize=1)
def _sync_file_range() -> Any:
    try:
        from compose.heap import libc

        fn = libc(use_errno=True).sync_file_range
    except AttributeError:                  # no C library, or not Linux's: nothing to do
        return None
    fn.argtypes = [ctypes.c_int, ctypes.c_int64, ctypes.c_int64, ctypes.c_uint]
    fn.restype = ctypes.c_int
    return fn


#: Outputs of at least this many bytes (before compression) are written by :class:`DirectFile`
#: past the page cache; smaller ones (a tile pyramid's thousands of small files) through it. The
#: 1500 x 1500 demo render's PNG and GeoTIFF (6.75 MB each before compression) written direct:
#: 2.61 -> 2.53 CPU-s for the whole ``compose render`` (medians of 7 alternating; measured, no
#: source).
DIRECT_BYTES = 1 << 20
#: Bytes :class:`DirectFile` gathers before a write (a multiple of any block size it aligns to).
DIRECT_STEP = 4 << 20
_ALIGN = 4096           # buffer address, file offsets and lengths of direct writes


class DirectFile:
    """An output file written front to back (``append``: after what the file holds) from a
    buffer of our own, :data:`DIRECT_STEP` bytes per write; ``direct``: the writes bypass the
    page cache (Linux ``O_DIRECT``: the disk reads the buffer itself), where the file system
    allows it, else (or without ``direct``) they go through it, the disk writing started as
    they go every :data:`DIRECT_STEP` bytes (Linux ``sync_file_range``, asynchronous), so the
    fsync that commits the outputs finds little left to write.

    Why: a file written through the page cache needs a fresh page of memory for every 4 kB
    written, which the kernel fills with a copy. On the 2-core virtual machine of the benchmarks
    that copy cost about 7 s of CPU per GB (the memory was handed back to the host while free
    and is faulted in again; 0.25 s for 200 MB written a second time): the 8192 x 8192 bench
    render's PNG and GeoTIFF (210 MB) spent about 1 s of system time there against 0.02 s
    written direct (measured, no source). The last partial block of a direct file goes through
    the page cache (``O_DIRECT`` cleared: Linux ``fcntl(F_SETFL)``), as do :meth:`pwrite`'s
    patches after :meth:`finish`.

    Not for a file other code writes at the same time. A process forked while it is open
    may finish the file alone with its copy of the object (this one then neither writes nor
    closes): :meth:`flush` leaves nothing to write twice.
    """

    def __init__(self, path, *, append: bool = False, direct: bool = True,
                 step: int = DIRECT_STEP):
        flags = os.O_WRONLY | (0 if append else os.O_CREAT | os.O_TRUNC)
        o_direct = getattr(os, "O_DIRECT", 0) if direct else 0
        self.direct = bool(o_direct)
        fd = -1
        if o_direct:
            try:
                fd = os.open(path, flags | o_direct, 0o666)
            except OSError:         # e.g. EINVAL: a file system without direct writes
                self.direct = False
        if fd < 0:
            fd = os.open(path, flags, 0o666)
        self._fd = fd
        self.closed = False
        self._step = max(_ALIGN, step - step % _ALIGN)
        raw = np.empty(self._step + _ALIGN, np.uint8)
        skip = -raw.ctypes.data % _ALIGN
        self._buf = raw[skip:skip + self._step]         # aligned for direct writes
        self._n = 0                 # bytes in the buffer
        self._pos = 0               # file offset of the buffer's first byte
        if append:
            end = os.fstat(fd).st_size
            # direct writes start on a block boundary: the partial block before the end is
            # read back into the buffer (written again, unchanged)
            self._pos = end - end % _ALIGN if self.direct else end
            head = end - self._pos
            if head:
                with open(path, "rb") as f:
                    f.seek(self._pos)
                    self._buf[:head] = np.frombuffer(f.read(head), np.uint8)
                self._n = head
        self._sync = _sync_file_range() if not self.direct else None
        self._synced = self._pos    # (through the page cache) bytes whose writing was started

    def tell(self) -> int:
        """Bytes of the file so far (written or in the buffer)."""
        return self._pos + self._n

    def fileno(self) -> int:
        return self._fd

    def write(self, data) -> int:
        """Append ``data`` (bytes-like); returns its length."""
        view = np.frombuffer(data, np.uint8) if not isinstance(data, np.ndarray) \
            else data.reshape(-1).view(np.uint8)
        done, size = 0, view.size
        while done < size:
            take = min(size - done, self._step - self._n)
            self._buf[self._n:self._n + take] = view[done:done + take]
            self._n += take
            done += take
            if self._n == self._step:
                self._write_out(self._n)
        return size

    def _write_out(self, n: int) -> None:
        """Write the buffer's first ``n`` bytes (a multiple of the alignment when direct) and
        keep the rest at its front."""
        if n:
            try:
                _pwrite_all(self._fd, self._buf[:n].data, self._pos)
            except OSError as exc:
                if not self.direct or exc.errno != errno.EINVAL:
                    raise
                # the file system took O_DIRECT at open but not this write (an alignment
                # larger than ours): through the page cache from here on
                self._through_cache()
                _pwrite_all(self._fd, self._buf[:n].data, self._pos)
        self._pos += n
        rest = self._n - n
        if rest:
            self._buf[:rest] = self._buf[n:self._n]
        self._n = rest
        if self._sync is not None and self._pos - self._synced >= self._step:
            self._sync(self._fd, self._synced, self._pos - self._synced, _SYNC_FILE_RANGE_WRITE)
            self._synced = self._pos

    def flush(self) -> None:
        """Write what the buffer holds (when direct: its whole blocks)."""
        self._write_out(self._n - self._n % _ALIGN if self.direct else self._n)

    def finish(self) -> None:
        """Write everything, the last partial block included; the file stays open for
        :meth:`pwrite`."""
        self.flush()
        if self._n:
            self._through_cache()       # the rest is shorter than a block
            self._write_out(self._n)

    def _through_cache(self) -> None:
        """Write through the page cache from now on (clear ``O_DIRECT``)."""
        if self.direct:
            import fcntl

            fcntl.fcntl(self._fd, fcntl.F_SETFL,
                        fcntl.fcntl(self._fd, fcntl.F_GETFL) & ~os.O_DIRECT)
            self.direct = False

    def pwrite(self, data: bytes, offset: int) -> None:
        """Write ``data`` at ``offset``: a patch of what is written (after :meth:`finish`)."""
        if self._n:
            raise ValueError("pwrite before the buffer is written (call finish first)")
        self._through_cache()
        _pwrite_all(self._fd, memoryview(data), offset)

    def close(self, sync: bool = False) -> None:
        """Write everything, flush it to the disk with ``sync`` (fsync), close; idempotent."""
        if self.closed:
            return
        try:
            self.finish()
            if sync:
                os.fsync(self._fd)
        finally:
            self.abort()

    def abort(self) -> None:
        """Close without writing what the buffer holds; idempotent."""
        if not self.closed:
            self.closed = True
            os.close(self._fd)

    def __del__(self) -> None:
        if not getattr(self, "closed", True):
            self.abort()


def _pwrite_all(fd: int, data: memoryview, offset: int) -> None:
    while len(data):
        n = os.pwrite(fd, data, offset)
        data, offset = data[n:], offset + n


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
