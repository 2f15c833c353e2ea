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
