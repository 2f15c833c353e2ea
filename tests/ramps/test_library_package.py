"""The ramp library ships with the package: named freely, replaced by a style's own ramp, listed
by ``compose ramps`` (terminal swatches and a PNG sheet)."""
from __future__ import annotations

import re

import numpy as np
from click.testing import CliRunner
from PIL import Image

from compose.cli.main import cli
from compose.ramps.library import library_path
from compose.style import load_style
from compose.style.load import library_tables

MAP = '[map]\ncrs = "EPSG:32631"\nextent = [500000, 4000000, 503000, 4002000]\npixel = 30\n'


def _layer(ramp: str) -> str:
    return (f'[[layer]]\nname = "t"\nrole = "theme"\nkind = "field"\nsource = "t.tif"\n'
            f'ramp = "{ramp}"\n')


def test_library_is_package_data():
    path = library_path()
    assert path.is_file() and path.name == "library.toml" and path.parent.name == "ramps"
    assert {"land-growth", "water-growth", "change", "cover"} <= set(library_tables())


def test_style_names_a_library_ramp_without_defining_it(tmp_path):
    (tmp_path / "s.toml").write_text(MAP + _layer("water-growth"))
    style = load_style(tmp_path / "s.toml")
    # the twin and its base come along (the base is needed to build the twin), nothing else
    assert set(style.ramps) == {"water-growth", "land-growth"}
    assert style.ramps["water-growth"].path == library_path()


def test_own_ramp_replaces_the_library_ramp(tmp_path):
    own = '[ramp.change]\nkind = "sequential"\nthrough = ["#ffffff", "#000000"]\n'
    (tmp_path / "s.toml").write_text(MAP + own + _layer("change"))
    style = load_style(tmp_path / "s.toml")
    assert style.ramps["change"].path == tmp_path / "s.toml"
    assert style.ramps["change"].table["kind"] == "sequential"


def test_own_twin_of_a_library_ramp(tmp_path):
    own = '[ramp.mine]\ntwin = "land-growth"\nhue = [20, 40]\n'
    (tmp_path / "s.toml").write_text(MAP + own + _layer("mine"))
    from compose.ramps import build_ramps
    ramps = build_ramps(load_style(tmp_path / "s.toml").ramps)
    assert ramps["mine"].twin_of == "land-growth" and "land-growth" in ramps


def test_compose_ramps_plain_when_not_a_terminal():
    result = CliRunner().invoke(cli, ["ramps"])
    assert result.exit_code == 0, result.output
    assert "\x1b[" not in result.output
    names = [line.split()[0] for line in result.output.splitlines()[:-1]]
    assert names == list(library_tables())
    assert re.search(r"^land-growth +sequential, 0 to 12$", result.output, re.M)


def test_compose_ramps_swatches_are_the_drawn_colors():
    from compose.cli.ramps import STRIP_CELLS
    from compose.ramps import build_ramps

    result = CliRunner().invoke(cli, ["ramps", "--color"])
    assert result.exit_code == 0, result.output
    line = next(l for l in result.output.splitlines() if "land-growth " in l)
    cells = [tuple(map(int, m)) for m in re.findall(r"\x1b\[48;2;(\d+);(\d+);(\d+)m", line)]
    assert len(cells) == STRIP_CELLS
    ramp = build_ramps(library_tables())["land-growth"]
    lo, hi = ramp.domain
    values = lo + (np.arange(STRIP_CELLS) + 0.5) / STRIP_CELLS * (hi - lo)
    expected = np.rint(np.clip(ramp.colors_at(values), 0, 1) * 255).astype(int)
    np.testing.assert_array_equal(np.array(cells), expected)
    assert line.rstrip().endswith("sequential, 0 to 12") and "\x1b[0m" in line


def test_compose_ramps_sheet(tmp_path):
    out = tmp_path / "sheet.png"
    result = CliRunner().invoke(cli, ["ramps", "--sheet", str(out)])
    assert result.exit_code == 0, result.output
    img = np.asarray(Image.open(out).convert("RGB"))
    assert img.shape[1] == 1200 and img.shape[0] > 100 * len(library_tables()) / 2
    assert len(np.unique(img.reshape(-1, 3), axis=0)) > 500      # strips, not a blank page


def test_compose_ramp_without_style_reads_the_library():
    result = CliRunner().invoke(cli, ["ramp", "change"])
    assert result.exit_code == 0, result.output
    assert 'ramp "change": diverging' in result.output
    result = CliRunner().invoke(cli, ["ramp", "nope"])
    assert result.exit_code == 2 and 'no ramp "nope"; ramps: change' in result.output
