"""Where and how the check's cache entries are kept (:mod:`compose.check_cache`): one file per
entry in the cache folder's ``check/`` subfolder, written to a temporary file and renamed into
place, read whole (any damage makes the entry a miss), and trimmed least recently used first.

An entry file: :data:`MAGIC`, the header's length (8 bytes, little-endian), a JSON header (the
entry's meta, and per array its dtype, shape and place), then each array deflated (zlib-ng,
level 1) -- or as it is, with its CRC-32, when a sample of it deflates to more than
:data:`RAW_RATIO` of its size.
"""
from __future__ import annotations

import contextlib
import json
import os
import tempfile
from pathlib import Path

import numpy as np

__all__ = ["CACHE_VERSION", "MAX_BYTES", "MAGIC", "SUBDIR", "load_entry", "save_entry",
           "clear_cache", "trim_cache", "EntryArrays"]

#: Bumped whenever an entry's layout or meaning changes.
CACHE_VERSION = 1
#: The check's entries are kept under this many bytes: after a check stores new entries, the
#: least recently used ones go (an entry read by a check counts as used).
MAX_BYTES = 2 << 30
#: First bytes of an entry file: the format's name and version.
MAGIC = b"compose check cache 1\n"
#: The cache root's folder of the check's entries.
SUBDIR = "check"
#: An array whose first SAMPLE_BYTES deflate to more than RAW_RATIO of their size is stored as it
#: is (a field's ramp indices: 4.5 MB deflated to 3.5 MB in 70 ms at the demo's 1500 x 1500).
SAMPLE_BYTES = 256 << 10
RAW_RATIO = 0.6


class EntryArrays:
    """An entry's arrays, decompressed (all of them, when the entry is read: a damaged one
    then makes the whole entry a miss instead of failing half-way through the walk)."""

    def __init__(self, blob: memoryview, table: dict, shape: list):
        from zlib_ng import zlib_ng

        self._arrays: dict[str, np.ndarray] = {}
        for name, (dtype, dims, start, length, *how) in table.items():
            if list(dims) != list(shape):
                raise ValueError(f"array {name} is not of the canvas's shape")
            raw: bytes | memoryview
            if how and how[0] == "raw":      # stored as it is: its CRC-32 says it is whole
                raw = blob[start:start + length]
                if len(how) != 2 or zlib_ng.crc32(raw) != how[1]:
                    raise ValueError(f"array {name} is damaged")
            else:                               # deflate streams carry their own checksum
                raw = zlib_ng.decompress(blob[start:start + length])
            self._arrays[name] = np.frombuffer(raw, dtype=np.dtype(dtype)).reshape(dims)
        self.files = list(self._arrays)

    def __getitem__(self, name: str) -> np.ndarray:
        return self._arrays[name]

    def close(self) -> None:
        self._arrays = {}


def load_entry(path: Path) -> tuple[dict, EntryArrays] | None:
    """An entry's (meta, arrays), or None when missing, unreadable or damaged in any way (the
    entry is then rebuilt)."""
    try:
        with open(path, "rb") as f:
            data = f.read()
    except OSError:
        return None
    try:
        if not data.startswith(MAGIC):
            raise ValueError("not an entry")
        at = len(MAGIC)
        n = int.from_bytes(data[at:at + 8], "little")
        head = json.loads(data[at + 8:at + 8 + n].decode())
        meta, table = head["meta"], head["arrays"]
        if meta.get("version") != CACHE_VERSION:
            raise ValueError("old entry")
        arrays = EntryArrays(memoryview(data)[at + 8 + n:], table, meta["shape"])
        if any(f"a{j}" not in arrays.files for j in range(int(meta["slots"]))):
            raise ValueError("an array is missing")
        return meta, arrays
    except Exception:               # noqa: BLE001 -- any damage: ignore the entry, rebuild it
        return None


def save_entry(path: Path, meta: dict, arrays: dict[str, np.ndarray]) -> None:
    """Write an entry atomically (a temporary file in the same folder, then renamed; the layout
    is the module's docstring's)."""
    from zlib_ng import zlib_ng

    blobs, table, at = [], {}, 0
    for name, arr in arrays.items():
        arr = np.ascontiguousarray(arr)
        data = arr.tobytes()
        sample = data[:SAMPLE_BYTES]
        if len(data) > 2 * SAMPLE_BYTES and \
                len(zlib_ng.compress(sample, 1)) > RAW_RATIO * len(sample):
            blob, how = data, ["raw", zlib_ng.crc32(data)]  # noisy indices: deflate saves little
        else:
            blob, how = zlib_ng.compress(data, 1), []
        table[name] = [arr.dtype.str, list(arr.shape), at, len(blob), *how]
        blobs.append(blob)
        at += len(blob)
    head = json.dumps({"meta": meta, "arrays": table}).encode()
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".entry-", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(MAGIC + len(head).to_bytes(8, "little") + head)
            for blob in blobs:
                f.write(blob)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def clear_cache(root: Path | None) -> int:
    """Delete the check's entries under ``root``; returns how many files were removed."""
    if root is None:
        return 0
    n = 0
    for path in [*(root / SUBDIR).glob("*.entry"), *(root / SUBDIR).glob(".entry-*.part")]:
        with contextlib.suppress(OSError):
            path.unlink()
            n += 1
    return n


def trim_cache(folder: Path, max_bytes: int = MAX_BYTES) -> int:
    """Delete the least recently used entries until ``folder`` holds at most ``max_bytes``;
    returns how many were deleted."""
    entries = []
    for path in folder.glob("*.entry"):
        with contextlib.suppress(OSError):
            st = path.stat()
            entries.append((st.st_mtime_ns, st.st_size, path))
    total = sum(size for _, size, _ in entries)
    gone = 0
    for _, size, path in sorted(entries):
        if total <= max_bytes:
            break
        with contextlib.suppress(OSError):
            path.unlink()
            total -= size
            gone += 1
    return gone
