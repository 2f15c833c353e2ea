"""An output set is complete or absent: every file of one render is written under a temporary
name and all are renamed into place together at the end.

:class:`OutputSet` is one render's transaction over the files ``NAME.*`` in one folder:

1. *Lock.* ``.NAME.lock`` in the folder is locked (``flock``) for the whole render, so a second
   render of the same name into the same folder is refused at once with one line instead of
   silently replacing the first one's files. Renders of other names are not held up.
2. *Recover.* Temporaries left by an earlier run that was killed are removed; a run killed in
   the middle of its final renames is completed (its list of renames was written first), so the
   folder never keeps a mixed set.
3. *Check.* Existing outputs are refused unless ``overwrite``; an unusable folder (read-only,
   not a folder, name too long) is an :class:`~compose.errors.OutputError`.
4. *Write.* :meth:`OutputSet.temporaries` gives one temporary path per output, inside the
   private folder ``.NAME.compose-tmp-XXXXXXXX`` beside the outputs (same file system).
5. *Commit.* :meth:`OutputSet.commit` flushes the temporaries to disk, writes the list of
   renames, renames every file into place with SIGINT / SIGTERM held off, and removes the
   private folder. :meth:`OutputSet.close` (always, in ``finally``) removes what was not
   committed and releases the lock.

A crash at any point leaves either the previous outputs or the new ones, never the report of one
render beside the map of another; only SIGKILL during the few renames can interrupt them, and the
next render of that name into that folder finishes the set before anything else.
"""
from __future__ import annotations

import contextlib
import errno
import fcntl
import json
import os
import re
import secrets
import shutil
import signal
import threading
from collections.abc import Iterator, Mapping
from pathlib import Path

from compose.errors import OutputError

__all__ = ["OutputSet", "TEMP_MARK", "stale_temporaries"]

#: Marker of a render's private temporary folder: ``.NAME.compose-tmp-XXXXXXXX``.
TEMP_MARK = ".compose-tmp-"
_JOURNAL = "renames.json"


def _os_reason(exc: OSError) -> str:
    if exc.errno == errno.ENAMETOOLONG:
        return "file name too long"
    if exc.errno in (errno.EROFS, errno.EACCES, errno.EPERM):
        return f"not writable ({exc.strerror})"
    return exc.strerror or str(exc)


def _temp_pattern(name: str) -> re.Pattern:
    return re.compile(r"^\." + re.escape(name) + re.escape(TEMP_MARK) + r"[0-9a-f]{8}$")


def stale_temporaries(folder: Path, name: str) -> list[Path]:
    """The private temporary folders of renders of ``name`` in ``folder`` (any age)."""
    pattern = _temp_pattern(name)
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return []
    return [Path(e.path) for e in entries if pattern.match(e.name) and e.is_dir(follow_symlinks=False)]


@contextlib.contextmanager
def _signals_held() -> Iterator[None]:
    """SIGINT and SIGTERM wait until the block is done (main thread only)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    held = {signal.SIGINT, signal.SIGTERM}
    old = signal.pthread_sigmask(signal.SIG_BLOCK, held)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_SETMASK, old)


def _fsync(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


class OutputSet:
    """The files of one render (``finals``: kind -> final path, all in one folder) as one
    transaction. ``name``: the output stem (default: the stem shared by the finals).
    Raises :class:`OutputError` when the folder cannot be used, another render of ``name`` holds
    the folder, or outputs exist and ``overwrite`` is false.
    """

    def __init__(self, finals: Mapping[str, Path], *, overwrite: bool = False,
                 name: str | None = None) -> None:
        self.finals = {k: Path(p) for k, p in finals.items()}
        folders = {p.parent for p in self.finals.values()}
        if len(folders) != 1:
            raise ValueError("an output set lives in one folder")
        self.folder = folders.pop()
        self.name = name or os.path.commonprefix([p.name for p in self.finals.values()]).rstrip(".")
        self._lock_fd: int | None = None
        self._lock_path = self.folder / f".{self.name}.lock"
        self._tmpdir: Path | None = None
        self._temps: dict[str, Path] | None = None
        self.committed = False
        self._make_folder()
        self._lock()
        try:
            self._recover()
            self._check_existing(overwrite)
            self._tmpdir = self._new_tmpdir()
        except BaseException:
            self.close()
            raise

    # --- opening ---------------------------------------------------------------------------
    def _make_folder(self) -> None:
        for p in self.finals.values():
            if len(p.name.encode("utf-8", "surrogatepass")) > 240:
                raise OutputError(f"output file name too long: {p.name[:80]}...")
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
        except FileExistsError:
            raise OutputError(f"output folder {self.folder} is a file, not a folder") from None
        except OSError as exc:
            raise OutputError(f"cannot create output folder {self.folder}: {_os_reason(exc)}") from None
        if not self.folder.is_dir():
            raise OutputError(f"output folder {self.folder} is not a folder")

    def _lock(self) -> None:
        """Take ``.NAME.lock``; the lock file is checked to still be the one in the folder after
        locking (a finishing run removes it), else tried again."""
        for _ in range(20):
            try:
                fd = os.open(self._lock_path, os.O_RDWR | os.O_CREAT | os.O_CLOEXEC, 0o644)
            except OSError as exc:
                raise OutputError(f"cannot write in output folder {self.folder}: "
                                  f"{_os_reason(exc)}") from None
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError as exc:
                os.close(fd)
                if exc.errno in (errno.EWOULDBLOCK, errno.EAGAIN):
                    raise OutputError(
                        f"another compose run is writing {self.name}.* in {self.folder}; "
                        f"wait for it to finish or choose another --out folder") from None
                raise OutputError(f"cannot lock {self._lock_path}: {_os_reason(exc)}") from None
            try:
                same = os.fstat(fd).st_ino == os.stat(self._lock_path).st_ino
            except FileNotFoundError:
                same = False
            if same:
                self._lock_fd = fd
                with contextlib.suppress(OSError):
                    os.ftruncate(fd, 0)
                    os.write(fd, f"{os.getpid()}\n".encode())
                return
            os.close(fd)
        raise OutputError(f"cannot lock {self._lock_path}: it keeps changing")

    def _recover(self) -> None:
        """Finish the renames of a run killed while committing; remove other runs' leftovers."""
        for stale in stale_temporaries(self.folder, self.name):
            journal = stale / _JOURNAL
            if journal.is_file():
                try:
                    renames = json.loads(journal.read_text(encoding="utf-8"))
                except (OSError, ValueError):
                    renames = []
                for tmp_name, final_name in renames:
                    tmp, final = stale / tmp_name, self.folder / final_name
                    if tmp.is_file() and "/" not in final_name:
                        with contextlib.suppress(OSError):
                            os.replace(tmp, final)
            shutil.rmtree(stale, ignore_errors=True)
        # temporaries of the older one-file-at-a-time writer (``.NAME.png.XXXX.part.png``)
        for final in self.finals.values():
            old = re.compile(r"^\." + re.escape(final.name) + r"\.[A-Za-z0-9_]{8}\.part"
                             + re.escape(final.suffix) + "$")
            with contextlib.suppress(OSError):
                for entry in os.scandir(self.folder):
                    if old.match(entry.name) and entry.is_file(follow_symlinks=False):
                        with contextlib.suppress(OSError):
                            os.unlink(entry.path)

    def _check_existing(self, overwrite: bool) -> None:
        if overwrite:
            return
        existing = [str(p) for p in self.finals.values() if os.path.lexists(p)]
        if existing:
            raise OutputError(f"output exists (use --overwrite): {', '.join(existing)}")

    def _new_tmpdir(self) -> Path:
        path = self.folder / f".{self.name}{TEMP_MARK}{secrets.token_hex(4)}"
        try:
            path.mkdir(mode=0o755)
        except OSError as exc:
            raise OutputError(f"cannot write in output folder {self.folder}: "
                              f"{_os_reason(exc)}") from None
        return path

    # --- writing ---------------------------------------------------------------------------
    def temporaries(self) -> dict[str, Path]:
        """kind -> the temporary path to write that output to (same names as the finals, in the
        private folder; nothing is created)."""
        if self._tmpdir is None:
            raise RuntimeError("the output set is closed")
        if self._temps is None:
            self._temps = {k: self._tmpdir / p.name for k, p in self.finals.items()}
        return dict(self._temps)

    def commit(self) -> None:
        """Rename every written temporary into place, all or (until a SIGKILL) none.

        Raises :class:`OutputError` if an output was not written."""
        temps = self.temporaries()
        missing = [str(self.finals[k].name) for k, t in temps.items() if not t.is_file()]
        if missing:
            raise OutputError(f"render did not write {', '.join(missing)}")
        umask = os.umask(0)
        os.umask(umask)
        for tmp in temps.values():
            os.chmod(tmp, 0o666 & ~umask)
            _fsync(tmp)
        renames = [[tmp.name, self.finals[k].name] for k, tmp in temps.items()]
        journal = self._tmpdir / _JOURNAL
        journal.write_text(json.dumps(renames), encoding="utf-8")
        _fsync(journal)
        with _signals_held():
            for k, tmp in temps.items():
                os.replace(tmp, self.finals[k])
            self.committed = True
            shutil.rmtree(self._tmpdir, ignore_errors=True)
            self._tmpdir = None
            with contextlib.suppress(OSError):
                _fsync(self.folder)

    def close(self) -> None:
        """Remove what was not committed and release the lock (safe to call twice)."""
        if self._tmpdir is not None:
            shutil.rmtree(self._tmpdir, ignore_errors=True)
            self._tmpdir = None
        if self._lock_fd is not None:
            with contextlib.suppress(OSError):
                os.unlink(self._lock_path)
            with contextlib.suppress(OSError):
                os.close(self._lock_fd)
            self._lock_fd = None

    def __enter__(self) -> OutputSet:
        return self

    def __exit__(self, exc_type, exc, tb) -> None:
        try:
            if exc_type is None and not self.committed:
                self.commit()
        finally:
            self.close()
