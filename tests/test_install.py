"""A plain, non-editable install outside the repository works: list ramps, copy the demo region,
init a style from it and render it to a passing map.

To stay fast the fresh virtual environment borrows the test environment's dependencies (a .pth
file naming its site-packages, so nothing is downloaded) and the wheel is built without build
isolation from a copy of the source tree; compose itself comes only from that install (the test
checks where it was imported from).
"""
from __future__ import annotations

import os
import shutil
import subprocess
import sys
import sysconfig
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
_SKIP = shutil.ignore_patterns(".git", ".venv", "out", "build", "__pycache__", "*.egg-info",
                               ".hypothesis", ".pytest_cache", ".notes", "tests", "bench")


def _run(args, cwd, env, timeout=600):
    done = subprocess.run(args, cwd=cwd, env=env, capture_output=True, text=True, timeout=timeout)
    assert done.returncode == 0, f"{' '.join(map(str, args))}\n{done.stdout}\n{done.stderr}"
    return done.stdout


@pytest.mark.slow
def test_fresh_install_lists_ramps_inits_and_renders(tmp_path):
    pytest.importorskip("setuptools", minversion="77")
    src = tmp_path / "src"
    shutil.copytree(ROOT, src, ignore=_SKIP)
    venv = tmp_path / "venv"
    _run([sys.executable, "-m", "venv", "--without-pip", str(venv)], tmp_path, os.environ)
    py = venv / "bin" / "python"
    site = Path(_run([str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
                     tmp_path, os.environ).strip())
    borrowed = {sysconfig.get_paths()["purelib"], sysconfig.get_paths()["platlib"]}
    (site / "_borrowed_dependencies.pth").write_text("\n".join(sorted(borrowed)) + "\n")
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "VIRTUAL_ENV")}
    env["PATH"] = f"{venv / 'bin'}{os.pathsep}{env.get('PATH', '')}"
    _run([str(py), "-m", "pip", "install", "--no-deps", "--no-build-isolation", "--no-index",
          "--quiet", str(src)], tmp_path, env)
    work = tmp_path / "user"
    work.mkdir()
    where = _run([str(py), "-c", "import compose; print(compose.__file__)"], work, env).strip()
    assert Path(where).is_relative_to(venv), where           # not the checkout's editable copy
    compose = str(venv / "bin" / "compose")

    listed = _run([compose, "ramps"], work, env)
    assert "land-growth" in listed and "change" in listed
    _run([compose, "demo", "--data-only", "--out", "demo"], work, env)
    region = work / "demo" / "demo_region"
    said = _run([compose, "init", str(region / "elevation.tif"), str(region / "anomaly.tif"),
                 str(region / "vectors.gpkg"), "--out", "mine.toml"], work, env)
    assert "relief" in said and "diverging" in said
    rendered = _run([compose, "render", "mine.toml", "--out", "maps"], work, env)
    assert "check   passed" in rendered
    assert (work / "maps" / "mine.png").stat().st_size > 100_000
