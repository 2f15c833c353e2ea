import pytest

from compose.errors import OutputError
from compose.output.atomic import atomic_path, check_writable


def test_failure_leaves_nothing(tmp_path):
    final = tmp_path / "map.png"
    with pytest.raises(RuntimeError):
        with atomic_path(final) as tmp:
            tmp.write_bytes(b"half")
            raise RuntimeError("boom")
    assert not final.exists()
    assert list(tmp_path.iterdir()) == []


def test_success_renames_and_keeps_old_until_done(tmp_path):
    final = tmp_path / "map.png"
    final.write_bytes(b"old")
    with atomic_path(final) as tmp:
        tmp.write_bytes(b"new")
        assert final.read_bytes() == b"old"
    assert final.read_bytes() == b"new"


def test_existing_outputs_need_overwrite(tmp_path):
    (tmp_path / "a.png").write_bytes(b"x")
    with pytest.raises(OutputError, match="--overwrite"):
        check_writable([tmp_path / "a.png", tmp_path / "b.tif"], overwrite=False)
    check_writable([tmp_path / "a.png"], overwrite=True)


# --- DirectFile: files written from a buffer of our own, past the page cache where allowed ------

import os  # noqa: E402

import numpy as np  # noqa: E402

from compose.output.atomic import DirectFile  # noqa: E402


def _pieces(seed: int, total: int):
    rng = np.random.default_rng(seed)
    cuts = np.sort(rng.integers(0, total, 40))
    data = rng.integers(0, 256, total, dtype=np.uint8).tobytes()
    return data, [data[a:b] for a, b in zip([0, *cuts], [*cuts, total])]


@pytest.mark.parametrize("direct", [True, False])
def test_direct_file_same_bytes_as_written(tmp_path, direct):
    # Pieces of every size (empty ones, pieces longer than the buffer, a tail shorter than a
    # block) make the file that is their concatenation; tell() counts what was given.
    data, pieces = _pieces(1, 3 * 8192 + 123)
    f = DirectFile(tmp_path / "a.bin", direct=direct, step=8192)
    for p in pieces:
        f.write(p)
    assert f.tell() == len(data)
    f.close(sync=True)
    f.close()                                   # idempotent
    assert (tmp_path / "a.bin").read_bytes() == data
    assert f.closed


@pytest.mark.parametrize("direct", [True, False])
def test_direct_file_appends_and_patches(tmp_path, direct):
    # Appending after a prefix that ends inside a block keeps the prefix byte for byte (a
    # direct file writes its partial last block again); patches after finish() land in place.
    head, _ = _pieces(2, 5000)
    tail, pieces = _pieces(3, 20000)
    path = tmp_path / "b.bin"
    path.write_bytes(head)
    f = DirectFile(path, append=True, direct=direct, step=4096)
    assert f.tell() == len(head)
    for p in pieces:
        f.write(p)
    with pytest.raises(ValueError, match="finish"):
        f.pwrite(b"x", 0)                       # not before the buffer is written
    f.finish()
    f.pwrite(b"PATCH", 10)
    f.close()
    expected = bytearray(head + tail)
    expected[10:15] = b"PATCH"
    assert path.read_bytes() == bytes(expected)


def test_direct_file_abort_and_flush(tmp_path):
    # flush() writes the buffer's whole blocks (a process forked after it finishes the file
    # alone); abort() closes without writing what is left in the buffer.
    data, _ = _pieces(4, 4096 * 3 + 10)
    f = DirectFile(tmp_path / "c.bin", step=4096 * 4)
    f.write(data)
    f.flush()
    f.abort()
    written = (tmp_path / "c.bin").read_bytes()
    assert written == data[:len(written)]
    assert len(written) >= 4096 * 3 if f.direct else len(written) == len(data)


def test_direct_file_without_o_direct(tmp_path, monkeypatch):
    # A system without O_DIRECT writes through the page cache: the same file.
    monkeypatch.delattr(os, "O_DIRECT", raising=False)
    data, pieces = _pieces(5, 10000)
    f = DirectFile(tmp_path / "d.bin", step=4096)
    assert not f.direct
    for p in pieces:
        f.write(p)
    f.close()
    assert (tmp_path / "d.bin").read_bytes() == data
