"""``compose tiles``: tile bounds against the published Web Mercator formulas, the pyramid's
files, a tile against a render of the same bounds, the viewer and the check report."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from click.testing import CliRunner
from matplotlib.image import imread
from pyproj import Transformer

from compose.api import check
from compose.check.stats import Statistics
from compose.cli.main import cli
from compose.engine import render_array
from compose.style import load_style
from compose.tiles.grid import parse_zooms, tile_bounds, tile_range, zoom_canvas
from compose.tiles.render import WEB_DPI, check_canvas, extent_3857
from tests.output._tiny import tiny_style


def _published_bounds(z, x, y):
    """Tile z/x/y from the slippy-map tile formulas (lon = x / 2^z * 360 - 180,
    lat = atan(sinh(pi (1 - 2 y / 2^z)))), projected to EPSG:3857 by pyproj."""
    n = 2 ** z
    lon0, lon1 = x / n * 360 - 180, (x + 1) / n * 360 - 180
    lat0 = math.degrees(math.atan(math.sinh(math.pi * (1 - 2 * (y + 1) / n))))
    lat1 = math.degrees(math.atan(math.sinh(math.pi * (1 - 2 * y / n))))
    t = Transformer.from_crs("EPSG:4326", "EPSG:3857", always_xy=True)
    (w, e), (s, nn) = t.transform([lon0, lon1], [lat0, lat1])
    return w, s, e, nn


@pytest.mark.parametrize("z,x,y", [(0, 0, 0), (4, 7, 5), (12, 2046, 1362), (15, 16384, 11000)])
def test_tile_bounds_equal_the_published_formulas(z, x, y):
    assert tile_bounds(z, x, y) == pytest.approx(_published_bounds(z, x, y), abs=1e-3)


def test_tile_range_and_zoom_parsing():
    b = tile_bounds(10, 500, 300)
    inner = (b[0] + 1, b[1] + 1, b[2] - 1, b[3] - 1)
    assert tile_range(10, inner) == (500, 300, 500, 300)
    assert parse_zooms("4-6") == [4, 5, 6] and parse_zooms("3,7") == [3, 7]
    with pytest.raises(ValueError):
        parse_zooms("4-30")


@pytest.fixture(scope="module")
def pyramid(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("tiles")
    path = tiny_style(tmp, extra=False, overlays=False)
    # "auto" relief stretch is measured on each canvas (a zoom's, or one tile's): fixed here so
    # a tile and a render of its bounds share every global decision
    path.write_text(path.read_text().replace('source = "dem.tif"',
                                             'source = "dem.tif"\nshade = { stretch = "none" }', 1))
    out = tmp / "tiles"
    result = CliRunner().invoke(cli, ["tiles", str(path), "--zoom", "13-15", "--out", str(out)])
    return load_style(path), out, result


def test_pyramid_files_only_where_the_data_is(pyramid):
    style, out, result = pyramid
    # exit 1 only when a check rule failed (the flat unstretched relief may fail relief-visible)
    failed = json.loads((out / "check.json").read_text())["passed"] is False
    assert result.exit_code == (1 if failed else 0), result.output
    footprint = extent_3857(style)
    for z in (13, 14, 15):
        x0, y0, x1, y1 = tile_range(z, footprint.bounds)
        files = sorted(out.glob(f"{z}/*/*.png"))
        assert files, z
        for f in files:
            x, y = int(f.parent.name), int(f.stem)
            assert x0 <= x <= x1 and y0 <= y <= y1
            w, s, e, n = tile_bounds(z, x, y)
            assert w < footprint.bounds[2] and e > footprint.bounds[0]
            img = imread(f)
            assert img.shape == (256, 256, 4)
            assert img[..., 3].max() == 1.0           # some data in every tile written
    # a tile just outside the data at the deepest zoom is not written
    x0, y0, x1, y1 = tile_range(15, footprint.bounds)
    assert not (out / "15" / str(x1 + 1)).exists()


def test_a_tile_agrees_with_a_render_of_its_bounds(pyramid):
    style, out, _ = pyramid
    z = 14
    f = sorted(out.glob(f"{z}/*/*.png"))[0]
    x, y = int(f.parent.name), int(f.stem)
    canvas = zoom_canvas(z, (x, y, x, y), WEB_DPI)
    image, _ = render_array(style, canvas=canvas)
    tile = np.rint(imread(f) * 255).astype(int)
    inside = tile[..., 3] == 255
    diff = np.abs(tile[..., :3] - image.astype(int))[inside]
    assert inside.sum() > 1000
    assert np.percentile(diff, 99) <= 2


def test_viewer_is_self_contained_and_report_written(pyramid):
    _, out, result = pyramid
    html = (out / "index.html").read_text()
    assert "http://" not in html and "https://" not in html
    assert '"zooms": [13, 14, 15]' in html
    assert "not for navigation" in html
    report = json.loads((out / "check.json").read_text())
    assert report["rules"]
    assert "check" in result.output


def test_the_check_judges_only_what_the_tiles_show(pyramid):
    # the tiles are transparent outside the style's extent: a layer covering the extent covers
    # all that is judged, as on the map itself (the tile blocks reach well past the extent)
    style, out, _ = pyramid
    tiles = {x["name"]: x["coverage"] for x in json.loads((out / "check.json").read_text())["layers"]}
    own = {x.name: x.coverage for x in check(style).layers}
    assert set(tiles) == set(own)
    for name, share in own.items():
        assert tiles[name] == pytest.approx(share, abs=0.02), name
    canvases = [check_canvas(style, z) for z in (13, 14, 15)]
    own_bounds = style.canvas().bounds       # west and north kept, the size rounded up
    assert canvases[0].crs == style.canvas().crs
    assert (canvases[0].bounds[0], canvases[0].bounds[3]) == (own_bounds[0], own_bounds[3])
    # one zoom deeper, tile pixels half the size (Web Mercator's scale at one latitude)
    assert canvases[1].transform.a == pytest.approx(canvases[0].transform.a / 2, rel=1e-3)


def test_statistics_of_several_canvases_add_up_their_sampled_pixels():
    # the blended colours are summed on every 2nd row and column (compose.measure): 3 x 5 and
    # 4 x 4 canvases sample 2 * 3 + 2 * 2 = 10 pixels of 31
    a = Statistics(width=3, height=5, layers=[], background=(1.0, 1.0, 1.0))
    b = Statistics(width=4, height=4, layers=[], background=(1.0, 1.0, 1.0))
    assert (a.sampled_pixels, b.sampled_pixels) == (6, 4)
    a.add_canvas(b)
    assert (a.pixels, a.sampled_pixels) == (31, 10)
    assert a.empty_like().sampled_pixels == 10
