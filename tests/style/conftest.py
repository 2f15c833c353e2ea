"""Style fixtures: TOML written inline into tmp_path."""
from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

MAP = """
[map]
crs    = "EPSG:32631"
extent = [500000, 4000000, 503000, 4002000]
pixel  = 30
"""

RELIEF = """
[[layer]]
name   = "relief"
role   = "ground"
kind   = "relief"
source = "dem.tif"
"""


@pytest.fixture
def write(tmp_path: Path):
    """write(name, text) -> Path: dedent ``text`` into tmp_path/name (folders created)."""
    def _write(name: str, text: str) -> Path:
        path = tmp_path / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(textwrap.dedent(text), encoding="utf-8")
        return path
    return _write


@pytest.fixture
def style(write):
    """style(body, name='style.toml') -> Path: a valid [map] plus ``body`` (layers, ramps...)."""
    def _style(body: str = RELIEF, name: str = "style.toml", map_: str = MAP) -> Path:
        return write(name, textwrap.dedent(map_) + textwrap.dedent(body))
    return _style
