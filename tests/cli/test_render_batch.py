"""``compose render`` on several styles and globs, ``--set`` overrides, and ``--series`` with
scales shared by every member. Real GeoTIFFs in tmp_path; outside reference for the shared
quantile breaks: numpy's quantile of the pooled member values."""
from __future__ import annotations

import json

import numpy as np
import pytest
from affine import Affine
from click.testing import CliRunner
from PIL import Image

from compose.cli.main import cli
from tests.sources._files import write_raster

UTM = "EPSG:32630"
T = Affine(100, 0, 500_000, 0, -100, 4_806_000)

STYLE = '''
[map]
name  = "{name}"
title = "{title}"
like  = "data"

[ramp.q]
kind    = "sequential"
domain  = [0, 40]
through = [{{L = 95, C = 10, h = 95}}, {{L = 55, C = 40, h = 140}}, {{L = 25, C = 20, h = 160}}]
steps   = 5
step_method = "quantile"

[[layer]]
name   = "data"
role   = "theme"
kind   = "field"
source = "{source}"
ramp   = "q"
'''


def _field(path, offset: float):
    y, x = np.mgrid[0:60, 0:60].astype("float32")
    # whole numbers, so a value shifted by 8 (24 columns) is exactly the same float
    write_raster(path, (x // 3 + y // 6 + offset).astype("float32"), crs=UTM, transform=T)


@pytest.fixture
def two_styles(tmp_path):
    _field(tmp_path / "a.tif", 0)
    _field(tmp_path / "b.tif", 10)
    for name, src in (("one", "a.tif"), ("two", "b.tif")):
        (tmp_path / f"{name}.toml").write_text(STYLE.format(name=name, title=name, source=src))
    return tmp_path


def run(*args):
    return CliRunner().invoke(cli, ["render", *map(str, args)])


def test_batch_of_files_and_globs(two_styles):
    out = two_styles / "out"
    result = run(two_styles / "*.toml", "--out", out)
    assert result.exit_code == 0, result.output
    assert (out / "one.png").is_file() and (out / "two.png").is_file()
    assert "== " in result.output
    result = run(two_styles / "one.toml", two_styles / "nothing-*.toml", "--out", out, "--overwrite")
    assert result.exit_code == 2 and "no style file matches" in result.output


def test_batch_continues_after_an_error(two_styles):
    (two_styles / "bad.toml").write_text("[map]\nlike = 1\n")
    out = two_styles / "out"
    result = run(two_styles / "bad.toml", two_styles / "one.toml", "--out", out)
    assert result.exit_code == 2
    assert "bad.toml" in result.output and (out / "one.png").is_file()


def test_set_overrides_title_and_source(two_styles):
    out = two_styles / "out"
    result = run(two_styles / "one.toml", "--out", out, "--set", "map.title=Dry season",
                 "--set", f"layer.data.source={two_styles / 'b.tif'}", "--set", "map.name=swapped")
    assert result.exit_code == 0, result.output
    reference = run(two_styles / "two.toml", "--out", out)
    assert reference.exit_code == 0
    a = np.asarray(Image.open(out / "swapped.png"))
    b = np.asarray(Image.open(out / "two.png"))
    np.testing.assert_array_equal(a, b)
    assert "Dry season" in (out / "swapped.html").read_text()


@pytest.mark.parametrize("setting,message", [
    ("map.pixel=-1", "map.pixel must be > 0"),
    ("layer.nope.source=x.tif", '--set layer.nope.source: no layer named "nope"; layers: data'),
    ("title=x", "a key path starts with one of"),
    ("layer.data.colour=1", "unknown key 'colour'"),
])
def test_set_is_validated_like_the_file(two_styles, setting, message):
    result = run(two_styles / "one.toml", "--out", two_styles / "out", "--set", setting)
    assert result.exit_code == 2 and message in result.output, result.output


def test_series_of_three_shares_one_scale(tmp_path):
    for i, date in enumerate(("2024-04", "2024-05", "2024-06")):
        _field(tmp_path / f"moist_{date}.tif", 8 * i)
    style = STYLE.format(name="moist-{date}", title="Moisture {date}", source="moist_{date}.tif")
    style += '\n[series]\ndate = ["2024-04", "2024-05", "2024-06"]\n'
    (tmp_path / "s.toml").write_text(style)
    plain = run(tmp_path / "s.toml", "--out", tmp_path / "out")
    assert plain.exit_code == 2 and "render it with --series" in plain.output
    out = tmp_path / "out"
    result = run(tmp_path / "s.toml", "--series", "--out", out)
    assert result.exit_code == 0, result.output
    record = json.loads((out / "s.series.json").read_text())    # named after the style file
    scale = record["scales"]["q"]
    assert scale["domain"] == [0, 40]
    # outside reference: numpy quantiles of the three members pooled (the canvas is the file grid)
    import rasterio
    values = []
    for d in ("2024-04", "2024-05", "2024-06"):
        with rasterio.open(tmp_path / f"moist_{d}.tif") as ds:
            values.append(ds.read(1).ravel())
    pooled = np.concatenate(values)
    expected = np.quantile(pooled[(pooled >= 0) & (pooled <= 40)], np.linspace(0, 1, 6)[1:-1])
    np.testing.assert_allclose(scale["breaks"], expected, rtol=0, atol=1e-4)
    # equal values, equal colours across members: member i is member 0 plus 8 i
    imgs = [np.asarray(Image.open(out / f"moist-{d}.png").convert("RGB"))
            for d in ("2024-04", "2024-05", "2024-06")]
    # so member 1 at column c equals member 0 at column c + 24 (x // 3: 24 columns = 8 units);
    # with breaks from each member's own data these would differ
    np.testing.assert_array_equal(imgs[1][:, :36], imgs[0][:, 24:])
    np.testing.assert_array_equal(imgs[2][:, :36], imgs[1][:, 24:])
    assert len({m["name"] for m in record["members"]}) == 3
    index = next(out.glob("*.series.html")).read_text()
    assert index.count("<img") == 3 and "Shared scales" in index and "2024-05" in index


def test_series_errors(tmp_path):
    _field(tmp_path / "moist_1.tif", 0)
    style = STYLE.format(name="m-{dat}", title="t", source="moist_{date}.tif")
    (tmp_path / "s.toml").write_text(style + '\n[series]\ndate = ["1"]\n')
    result = run(tmp_path / "s.toml", "--series", "--out", tmp_path / "out")
    assert result.exit_code == 2 and "uses {dat}; series variables: date" in result.output
    (tmp_path / "u.toml").write_text(STYLE.format(name="u", title="t", source="moist_1.tif")
                                     + '\n[series]\ndate = ["1", "2"]\nplace = ["a"]\n')
    result = run(tmp_path / "u.toml", "--series", "--out", tmp_path / "out")
    assert result.exit_code == 2 and "the same number of values; got date 2, place 1" in result.output


def test_the_summary_lines_up_its_paths_and_gives_sizes_in_si_units(tmp_path, capsys):
    """Every path in one column, however long the output's kind ("proof-deutan" pushed its path
    out of line), and each size in SI units (1 kB = 1000 bytes, BIPM SI Brochure 3.1 prefixes):
    a world file's 120 bytes are "120 B", not "0.0 MB"."""
    from types import SimpleNamespace

    from compose.cli.render import print_summary

    sizes = {"png": 3_300_000, "world": 120, "legend": 45_000, "proof-deutan": 2_700_000}
    outputs = {}
    for kind, n in sizes.items():
        outputs[kind] = tmp_path / f"m.{kind}"
        outputs[kind].write_bytes(b"\0" * n)
    result = SimpleNamespace(width=10, height=10, seconds={"total": 1.0}, outputs=outputs,
                             unplaced_labels={}, report=None)
    print_summary(result)
    lines = capsys.readouterr().out.splitlines()[1:]
    columns = {line.index(str(tmp_path)) for line in lines}
    assert len(lines) == 4 and len(columns) == 1
    assert [line.rsplit("(", 1)[1] for line in lines] == ["3.3 MB)", "120 B)", "45 kB)", "2.7 MB)"]
