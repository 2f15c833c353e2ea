"""Output sets: all files renamed together, leftovers of killed runs removed or finished, a lock
per name and folder."""
from __future__ import annotations

import json
import os

import pytest

from compose.errors import OutputError
from compose.output.transaction import TEMP_MARK, OutputSet, stale_temporaries


def finals(folder, name="map"):
    return {"png": folder / f"{name}.png", "check": folder / f"{name}.check.json"}


def test_commit_renames_every_file_and_leaves_nothing_else(tmp_path):
    out = tmp_path / "out"
    with OutputSet(finals(out)) as outputs:
        tmp = outputs.temporaries()
        assert all(p.parent != out for p in tmp.values())
        tmp["png"].write_bytes(b"png")
        tmp["check"].write_text("{}")
        assert sorted(os.listdir(out)) != []          # lock and private folder while writing
        assert not (out / "map.png").exists()
    assert sorted(os.listdir(out)) == ["map.check.json", "map.png"]


def test_a_failure_leaves_the_folder_as_it_was(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "map.png").write_bytes(b"old")
    with pytest.raises(RuntimeError, match="failed half way"):
        with OutputSet(finals(out), overwrite=True) as outputs:
            tmp = outputs.temporaries()
            tmp["png"].write_bytes(b"new")
            tmp["check"].write_text("{}")
            raise RuntimeError("failed half way")
    assert sorted(os.listdir(out)) == ["map.png"]
    assert (out / "map.png").read_bytes() == b"old"


def test_an_output_not_written_is_an_error_and_nothing_lands(tmp_path):
    out = tmp_path / "out"
    with pytest.raises(OutputError, match="did not write map.check.json"):
        with OutputSet(finals(out)) as outputs:
            outputs.temporaries()["png"].write_bytes(b"png")
    assert os.listdir(out) == []


def test_existing_outputs_are_refused_without_overwrite(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "map.check.json").write_text("{}")
    with pytest.raises(OutputError, match="--overwrite"):
        OutputSet(finals(out))
    assert os.listdir(out) == ["map.check.json"]


def test_a_second_set_of_the_same_name_is_refused_while_the_first_runs(tmp_path):
    out = tmp_path / "out"
    first = OutputSet(finals(out))
    try:
        with pytest.raises(OutputError, match="another compose run"):
            OutputSet(finals(out), overwrite=True)
        other = OutputSet(finals(out, "other"))     # another name in the same folder is fine
        other.close()
    finally:
        first.close()
    OutputSet(finals(out)).close()                  # free again once the first is done
    assert os.listdir(out) == []


def test_leftovers_of_a_killed_run_are_removed(tmp_path):
    out = tmp_path / "out"
    stale = out / f".map{TEMP_MARK}0123abcd"
    stale.mkdir(parents=True)
    (stale / "map.png").write_bytes(b"half")
    older = out / ".map.png.abcd1234.part.png"       # the one-file-at-a-time writer's kind
    older.write_bytes(b"half")
    unrelated = out / f".map.v2{TEMP_MARK}0123abcd"  # another name's run: not ours to remove
    unrelated.mkdir()
    OutputSet(finals(out)).close()
    assert sorted(os.listdir(out)) == [unrelated.name]
    assert stale_temporaries(out, "map.v2") == [unrelated]


def test_a_run_killed_while_renaming_is_finished_by_the_next(tmp_path):
    out = tmp_path / "out"
    stale = out / f".map{TEMP_MARK}0123abcd"
    stale.mkdir(parents=True)
    (out / "map.png").write_bytes(b"new map")       # renamed before the kill
    (stale / "map.check.json").write_text('{"new": true}')
    (stale / "renames.json").write_text(json.dumps([["map.png", "map.png"],
                                                    ["map.check.json", "map.check.json"]]))
    with pytest.raises(OutputError, match="--overwrite"):
        OutputSet(finals(out))
    assert json.loads((out / "map.check.json").read_text()) == {"new": True}
    assert sorted(os.listdir(out)) == ["map.check.json", "map.png"]


def test_unusable_folders_are_output_errors(tmp_path):
    afile = tmp_path / "file"
    afile.write_text("x")
    with pytest.raises(OutputError, match="not a folder|is a file"):
        OutputSet(finals(afile))
    with pytest.raises(OutputError, match="too long"):
        OutputSet(finals(tmp_path / ("o" * 300)))
    with pytest.raises(OutputError, match="too long"):
        OutputSet(finals(tmp_path, "n" * 250))
