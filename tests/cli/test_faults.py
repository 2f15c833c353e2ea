"""Faults while rendering: a full disk, a read-only folder, a source truncated or removed
mid-render, SIGINT / SIGTERM, two renders into one folder. Each ends non-zero with one line and
leaves no partial or temporary file (or, when it succeeds, the complete set)."""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from tests.cli._hostile import Ended, leftovers, run_in_process, run_subprocess
from tests.cli.test_hostile import set_map
from tests.output._tiny import tiny_style


def outputs_of(style: Path) -> list[str]:
    """The file names a render of ``style`` writes (every output of the set)."""
    from compose.render import output_paths
    from compose.style import load_style

    return sorted(p.name for p in output_paths(load_style(style), Path("out")).values())


def _mount_tmpfs(where: Path, size: str, *options: str) -> None:
    where.mkdir(parents=True, exist_ok=True)
    opts = ",".join((f"size={size}",) + options)
    p = subprocess.run(["mount", "-t", "tmpfs", "-o", opts, "tmpfs", str(where)],
                       capture_output=True, text=True)
    if p.returncode != 0:
        pytest.skip(f"cannot mount a small tmpfs here: {p.stderr.strip() or p.returncode}")


@pytest.fixture
def small_disk(tmp_path):
    """A 160 kB file system (tmpfs) the test may fill; unmounted afterwards."""
    where = tmp_path / "small"
    _mount_tmpfs(where, "160k")
    yield where
    subprocess.run(["umount", "-l", str(where)], capture_output=True)


def test_full_disk_is_one_line_and_leaves_nothing(tmp_path, small_disk):
    style = tiny_style(tmp_path / "in")
    out = small_disk / "out"
    line = run_in_process("render", style, "--out", out).assert_one_line(2, "space")
    assert "Traceback" not in line
    assert leftovers(out) == [], leftovers(out)


def test_read_only_folder_is_one_line_and_leaves_nothing(tmp_path):
    where = tmp_path / "ro"
    _mount_tmpfs(where, "1m", "ro")
    try:
        style = tiny_style(tmp_path / "in")
        line = run_in_process("render", style, "--out", where).assert_one_line(2, str(where))
        assert "not writable" in line or "Read-only" in line
        assert leftovers(where) == []
    finally:
        subprocess.run(["umount", "-l", str(where)], capture_output=True)


def _bigger(tmp_path) -> Path:
    """The tiny style on a canvas of 1280 x 1280 px (several windows, a few seconds)."""
    style = tiny_style(tmp_path / "in")
    set_map(style, "pixel", "1.5")
    return style


def _start(*args: str) -> subprocess.Popen:
    cmd = [sys.executable, "-c", "from compose.cli.main import main; main()", *map(str, args)]
    env = dict(os.environ)
    env.pop("COMPOSE_DEBUG", None)
    return subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


def _wait_for(predicate, timeout: float = 60.0) -> bool:
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if predicate():
            return True
        time.sleep(0.02)
    return False


def _writing(out: Path) -> bool:
    return out.exists() and any(".compose-tmp-" in p.name for p in out.iterdir())


@pytest.mark.parametrize("signum,code", [(signal.SIGINT, 130), (signal.SIGTERM, 143)])
def test_a_signal_mid_render_leaves_the_old_set_untouched(tmp_path, signum, code):
    style = _bigger(tmp_path)
    out = tmp_path / "out"
    out.mkdir()
    (out / "tiny.png").write_bytes(b"the previous map")
    proc = _start("render", style, "--out", out, "--overwrite")
    try:
        assert _wait_for(lambda: _writing(out)), "the render never started writing"
        time.sleep(0.3)
        proc.send_signal(signum)
        stdout, stderr = proc.communicate(timeout=60)
    finally:
        proc.kill()
    ended = Ended(proc.returncode, stdout, stderr)
    if proc.returncode in (0, 1):   # it finished before the signal arrived (1: its check failed)
        assert sorted(os.listdir(out)) == outputs_of(style)
        return
    ended.assert_one_line(code, "compose:")
    assert sorted(os.listdir(out)) == ["tiny.png"]
    assert (out / "tiny.png").read_bytes() == b"the previous map"


def test_two_renders_into_one_folder_never_mix(tmp_path):
    style = _bigger(tmp_path)
    out = tmp_path / "out"
    first = _start("render", style, "--out", out, "--overwrite")
    try:
        assert _wait_for(lambda: _writing(out)), "the first render never started writing"
        second = run_subprocess("render", style, "--out", out, "--overwrite", timeout=120)
        stdout, stderr = first.communicate(timeout=180)
    finally:
        first.kill()
    # 1: the tiny fixture fails its hierarchy check (render exits 1 after writing everything)
    assert first.returncode in (0, 1), stderr
    if second.code not in (0, 1):      # refused while the first held the folder
        second.assert_one_line(2, "another compose run", "tiny")
    assert sorted(os.listdir(out)) == outputs_of(style)


def test_a_source_truncated_mid_render_is_one_line_and_leaves_nothing(tmp_path):
    import numpy as np
    import rasterio
    from affine import Affine

    from compose.cli.failure import guarded
    from compose.render import render_style
    from compose.style import load_style
    from tests.output._tiny import CRS, NORTH, WEST

    style = _bigger(tmp_path)
    source = style.parent / "land.tif"
    values = np.tile(np.linspace(0, 10, 1280, dtype=np.float32), (1280, 1))
    with rasterio.open(source, "w", driver="GTiff", width=1280, height=1280, count=1,
                       dtype="float32", crs=CRS, transform=Affine(1.5, 0, WEST, 0, -1.5, NORTH),
                       tiled=True, blockxsize=256, blockysize=256, nodata=float("nan")) as ds:
        ds.write(values, 1)        # on the canvas grid, read window by window
    out = tmp_path / "out"

    class Truncate:
        def rows(self, row0, rgb8):
            with open(source, "r+b") as f:
                f.truncate(300)

    try:
        guarded(lambda: render_style(load_style(style), out, extra_sinks=[Truncate()]))()
        code = 0
    except SystemExit as exc:
        code = exc.code
    # a source read once and kept (small files are cached whole) may render completely
    if code == 0:
        assert sorted(os.listdir(out)) == outputs_of(style)
    else:
        assert code == 2
        assert leftovers(out) == []


def test_a_source_removed_mid_render_gives_a_whole_set_or_nothing(tmp_path):
    style = _bigger(tmp_path)
    out = tmp_path / "out"
    proc = _start("render", style, "--out", out)
    try:
        assert _wait_for(lambda: _writing(out)), "the render never started writing"
        (style.parent / "water.tif").unlink()
        stdout, stderr = proc.communicate(timeout=180)
    finally:
        proc.kill()
    if proc.returncode in (0, 1):     # the open file stays readable until closed (POSIX); 1: check failed
        assert sorted(os.listdir(out)) == outputs_of(style)
    else:
        Ended(proc.returncode, stdout, stderr).assert_one_line(2)
        assert leftovers(out) == []


def test_after_sigkill_the_next_render_cleans_up_and_completes(tmp_path):
    style = _bigger(tmp_path)
    out = tmp_path / "out"
    proc = _start("render", style, "--out", out)
    try:
        assert _wait_for(lambda: _writing(out)), "the render never started writing"
        proc.kill()                                  # SIGKILL: no cleanup can run
        proc.communicate(timeout=60)
    finally:
        proc.kill()
    finals = [name for name in os.listdir(out) if not name.startswith(".")]
    assert finals in ([], outputs_of(style)), finals    # never a partial set
    again = run_in_process("render", style, "--out", out, "--overwrite")
    assert again.code in (0, 1), again.stderr
    assert sorted(os.listdir(out)) == outputs_of(style)  # leftovers gone, one complete set
