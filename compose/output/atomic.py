"""Write-then-rename, so a failure never leaves a half-written output."""
from __future__ import annotations

import contextlib
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

from compose.errors import OutputError

__all__ = ["atomic_path", "check_writable"]


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
