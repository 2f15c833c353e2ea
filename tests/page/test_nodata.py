"""The page's guess of the layers showing no-data (compose.page.nodata), made from what the
sources say of themselves, against the set the walk's statistics find (the page uses what it drew
from the guess only when the two are equal)."""
from __future__ import annotations

import textwrap

import numpy as np
import pytest
from affine import Affine

from compose.engine import prepare, run
from compose.page.nodata import nodata_guess
from compose.render import nodata_seen
from compose.style import load_style
from tests.sources._files import write_raster

CRS = "EPSG:32631"
WEST, NORTH, PIXEL, SIZE = 500000.0, 4001920.0, 30.0, 64

STYLE = """
[map]
name   = "guess"
crs    = "EPSG:32631"
extent = [500000, 4000000, 501920, 4001920]
pixel  = 30

[ramp.growth]
kind    = "sequential"
domain  = [0, 10]
through = [{{ L = 95, C = 12, h = 100 }}, {{ L = 30, C = 22, h = 160 }}]

[[layer]]
name   = "{kind}"
role   = "{role}"
kind   = "{kind}"
source = "data.tif"
{options}
"""


def _case(tmp_path, *, nodata=None, holes=False, mask=False, half=False, kind="field",
          options='ramp = "growth"'):
    """A one-layer style over a 64 x 64 raster: ``nodata`` the file's nodata value (written into
    the cells of a hole when ``holes``), ``mask`` a per-dataset mask band with that hole instead,
    ``half``: the raster covers the canvas's west half only."""
    values = np.linspace(0, 10, SIZE * SIZE, dtype=np.float32).reshape(SIZE, SIZE)
    if kind == "relief":
        values = values * 50
    hole = np.zeros(values.shape, bool)
    hole[20:30, 20:30] = True
    if holes:
        values[hole] = nodata
    width = SIZE // 2 if half else SIZE
    write_raster(tmp_path / "data.tif", values[:, :width], crs=CRS,
                 transform=Affine(PIXEL, 0, WEST, 0, -PIXEL, NORTH), nodata=nodata,
                 mask=np.where(hole, 0, 255)[:, :width] if mask else None)
    role = "ground" if kind == "relief" else "theme"
    path = tmp_path / "style.toml"
    path.write_text(textwrap.dedent(STYLE.format(kind=kind, role=role, options=options)))
    prepared = prepare(load_style(path))
    try:
        guess = nodata_guess(prepared.layers, prepared.canvas)
        seen = nodata_seen(run(prepared, []))
    finally:
        prepared.close()
    return guess, seen


# GDAL's mask flags of a band (RFC 15, https://gdal.org/development/rfc/rfc15_nodatabitmask.html):
# GMF_ALL_VALID without a nodata value or mask, GMF_NODATA with one, GMF_PER_DATASET with a mask
# band; rasterio reads a nodata cell as masked and compose as NaN, drawn in the no-data colour
@pytest.mark.parametrize("case, options, expected", [
    ({"nodata": -9999.0, "holes": True}, 'ramp = "growth"', {"field"}),
    ({"nodata": -9999.0, "holes": True}, 'ramp = "growth"\nnodata = "#808080"', {"field"}),
    ({"nodata": -9999.0, "holes": True}, 'ramp = "growth"\nnodata = "transparent"', set()),
    ({}, 'ramp = "growth"', set()),                                   # every cell valid
    ({"half": True}, 'ramp = "growth"', {"field"}),                   # outside the source
    ({"mask": True}, 'ramp = "growth"', {"field"}),                   # a mask band's hole
    ({"nodata": -9999.0, "holes": True}, 'ramp = "growth"\nopacity = 0', set()),
])
def test_the_guess_is_the_walks_set(tmp_path, case, options, expected):
    guess, seen = _case(tmp_path, options=options, **case)
    assert seen == expected                 # what the walk finds (the truth)
    assert guess == frozenset(expected)


def test_a_relief_never_shows_its_no_data(tmp_path):
    """A relief's no-data cells are transparent (compose.layers.relief: alpha 0), so it is
    never guessed, holes or not."""
    guess, seen = _case(tmp_path, nodata=-9999.0, holes=True, kind="relief", options="")
    assert guess == frozenset() and seen == set()


def test_a_nodata_value_without_such_cells_is_a_wrong_guess(tmp_path):
    """The guess reads no pixels: a file with a nodata value but not one such cell on the canvas
    is guessed to show no-data while the walk finds none (then the page is drawn after the
    walk; compose.page.process)."""
    guess, seen = _case(tmp_path, nodata=-9999.0)
    assert guess == frozenset({"field"}) and seen == set()
