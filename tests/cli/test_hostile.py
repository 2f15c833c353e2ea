"""Hostile input: every group of issue 13 has its reproducer here. Each must end with exit 2
(bad input), one stderr line naming the key or file, no traceback and no output files.

The cases run the CLI in-process (click's runner) except those that could hang or exhaust
memory before the fix, which run as a subprocess with a wall-clock and address-space bound.
"""
from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pytest
import rasterio

from tests.cli._hostile import leftovers, replace_in, run_in_process, run_subprocess
from tests.output._tiny import tiny_style

# --- helpers --------------------------------------------------------------------------------


@pytest.fixture
def style(tmp_path) -> Path:
    return tiny_style(tmp_path / "in")


def check_refused(style: Path, tmp_path: Path, *contains: str, command: str = "render") -> str:
    out = tmp_path / "out"
    args = [command, style] + (["--out", out] if command == "render" else [])
    line = run_in_process(*args).assert_one_line(2, *contains)
    assert leftovers(out) == []
    return line


def set_map(style: Path, key: str, value: str) -> Path:
    """Replace ``key = ...`` of the tiny style's [map] table by ``key = value``."""
    text = style.read_text()
    lines = text.splitlines()
    for i, line in enumerate(lines):
        if line.split("=")[0].strip() == key:
            lines[i] = f"{key} = {value}"
            break
    else:
        i = lines.index("[map]")
        lines.insert(i + 1, f"{key} = {value}")
    style.write_text("\n".join(lines) + "\n")
    return style


# --- 1. values that crashed the loader or the engine ----------------------------------------


def test_deeply_nested_toml_is_refused(style, tmp_path):
    set_map(style, "title", "[" * 5000 + "]" * 5000)
    check_refused(style, tmp_path, "nest")


def test_nested_tables_past_the_depth_limit_are_refused(style, tmp_path):
    set_map(style, "title", "{ a = " * 40 + "1" + " }" * 40)
    check_refused(style, tmp_path, "nest")


@pytest.mark.parametrize("key,value", [
    ("dpi", "-1"), ("dpi", "1e308"), ("dpi", "inf"), ("dpi", "nan"), ("dpi", "0.001"),
    ("pixel", "-1"), ("pixel", "1e308"), ("pixel", "inf"), ("pixel", "1e-300"),
    ("extent", "[500000, 4000000, inf, 4001920]"), ("extent", "[-1e308, -1e308, 1e308, 1e308]"),
    ("extent", "[0, 0, 1e300, 1e300]"),
])
def test_absurd_map_numbers_are_refused(style, tmp_path, key, value):
    set_map(style, key, value)
    check_refused(style, tmp_path, f"map.{key}" if key != "extent" or "inf" in value else "map")


def test_very_long_source_path_is_refused(style, tmp_path):
    replace_in(style, 'source = "land.tif"', f'source = "{"d" * 300}/{"x" * 3000}.tif"')
    check_refused(style, tmp_path, 'layer "land-growth"', "source")


def test_very_long_output_folder_is_refused(style, tmp_path):
    out = tmp_path / ("o" * 300)
    line = run_in_process("render", style, "--out", out).assert_one_line(2, "output")
    assert "too long" in line


def test_engineering_crs_source_is_refused(style, tmp_path):
    local = 'LOCAL_CS["site grid",LOCAL_DATUM["site",0],UNIT["metre",1],AXIS["X",EAST],AXIS["Y",NORTH]]'
    path = style.parent / "local.tif"
    with rasterio.open(path, "w", driver="GTiff", height=8, width=8, count=1, dtype="float32",
                       crs=rasterio.crs.CRS.from_wkt(local),
                       transform=rasterio.transform.from_origin(0, 8, 1, 1)) as ds:
        ds.write(np.ones((1, 8, 8), np.float32))
    replace_in(style, 'source = "land.tif"', 'source = "local.tif"')
    check_refused(style, tmp_path, 'layer "land-growth"', "local.tif")


def test_engineering_crs_canvas_is_refused(style, tmp_path):
    set_map(style, "crs", '\'LOCAL_CS["site",LOCAL_DATUM["s",0],UNIT["metre",1]]\'')
    check_refused(style, tmp_path, "map.crs")


def test_symlink_loop_as_source_is_refused(style, tmp_path):
    loop = style.parent / "loop.tif"
    os.symlink(loop, loop)
    replace_in(style, 'source = "land.tif"', 'source = "loop.tif"')
    check_refused(style, tmp_path, 'layer "land-growth"', "loop.tif")


def test_text_at_absurd_size_is_refused(style, tmp_path):
    replace_in(style, "size     = 6", "size     = 1e300")
    check_refused(style, tmp_path, 'layer "town-names"', "size")


def test_priority_naming_a_text_attribute_is_refused(style, tmp_path):
    replace_in(style, 'text     = "name"', 'text     = "name"\npriority = "name"')
    check_refused(style, tmp_path, 'layer "town-names"', "priority", "name")


def test_ramp_domain_of_huge_numbers_is_refused(style, tmp_path):
    replace_in(style, "domain  = [0, 10]", "domain  = [-1e308, 1e308]")
    check_refused(style, tmp_path, "domain")


def test_nul_byte_in_extends_is_refused(style, tmp_path):
    style.write_text('extends = "base\\u0000.toml"\n' + style.read_text())
    line = check_refused(style, tmp_path, "extends")
    assert "\x00" not in line


def test_very_long_extends_is_refused(style, tmp_path):
    style.write_text(f'extends = "{"x" * 300}.toml"\n' + style.read_text())
    check_refused(style, tmp_path, "extends", "too long")


def test_nul_byte_in_source_is_refused(style, tmp_path):
    replace_in(style, 'source = "land.tif"', 'source = "la\\u0000nd.tif"')
    check_refused(style, tmp_path, 'layer "land-growth"', "source")


# --- 2. hangs and memory --------------------------------------------------------------------


@pytest.mark.parametrize("pixel", ["1", "0.5"])
def test_huge_extent_or_tiny_pixel_is_refused_before_work(style, tmp_path, pixel):
    set_map(style, "extent", "[0, 0, 6000000, 6000000]")
    set_map(style, "pixel", pixel)
    out = tmp_path / "out"
    line = run_subprocess("render", style, "--out", out, timeout=60).assert_one_line(2, "--max-pixels")
    assert "px" in line and leftovers(out) == []


def test_canvas_of_200000_squared_is_refused_with_size_and_option(style, tmp_path):
    set_map(style, "extent", "[500000, 4000000, 6500000, 10000000]")   # 200,000 px of 30 m
    out = tmp_path / "out"
    for command in (["render", style, "--out", out], ["check", style]):
        ended = run_subprocess(*command, timeout=60)
        line = ended.assert_one_line(2, "200000 x 200000", "--max-pixels")
        assert "GB" in line
    assert leftovers(out) == []


def test_max_pixels_option_raises_the_limit(style, tmp_path):
    set_map(style, "pixel", "3")     # 640 x 640 = 409,600 px
    line = run_in_process("check", style, "--max-pixels", "100000").assert_one_line(2, "640 x 640")
    assert "--max-pixels" in line
    ended = run_in_process("check", style, "--max-pixels", "1000000")
    assert ended.code in (0, 1), ended.stderr


def test_many_shade_directions_are_refused(style, tmp_path):
    replace_in(style, 'source = "dem.tif"', 'source = "dem.tif"\nshade = { directions = 1000000000 }')
    run_subprocess("check", style, timeout=60).assert_one_line(2, 'layer "relief"', "shade.directions")


def test_megabyte_strings_are_refused(style, tmp_path):
    set_map(style, "title", '"' + "x" * 1_000_000 + '"')
    line = check_refused(style, tmp_path, "map.title")
    assert len(line) < 1000


def test_megabyte_label_text_in_the_data_is_shortened(style, tmp_path):
    from tests.output._tiny import CRS, NORTH, WEST
    from tests.sources._files import write_vector
    write_vector(style.parent / "long.gpkg",
                 [({"type": "Point", "coordinates": (WEST + 300, NORTH - 600)}, {"name": "y" * 1_000_000})],
                 crs=CRS, properties={"name": "str"}, table="towns")
    text = style.read_text()
    head, tail = text.split('name     = "town-names"')
    style.write_text(head + 'name     = "town-names"' + tail.replace('"vectors.gpkg"', '"long.gpkg"', 1))
    ended = run_subprocess("check", style, timeout=120)
    assert ended.code in (0, 1), ended.stderr[-2000:]
    assert "Traceback" not in ended.stderr


def test_fifo_as_source_is_refused(style, tmp_path):
    fifo = style.parent / "pipe.tif"
    os.mkfifo(fifo)
    replace_in(style, 'source = "land.tif"', 'source = "pipe.tif"')
    run_subprocess("check", style, timeout=60).assert_one_line(2, 'layer "land-growth"', "pipe.tif",
                                                               "not a regular file")


def test_fifo_as_style_is_refused(tmp_path):
    fifo = tmp_path / "style.toml"
    os.mkfifo(fifo)
    run_subprocess("check", fifo, timeout=60).assert_one_line(2, "style.toml", "not a regular file")


def test_dev_zero_as_style_is_refused(tmp_path):
    run_subprocess("check", "/dev/zero", timeout=60).assert_one_line(2, "/dev/zero", "not a regular file")


def test_huge_style_file_is_refused(tmp_path):
    big = tmp_path / "big.toml"
    with open(big, "w") as f:
        f.write("# " + "x" * (20 << 20) + "\n")
    run_subprocess("check", big, timeout=60).assert_one_line(2, "big.toml", "MB")


def test_folder_as_source_is_refused(style, tmp_path):
    (style.parent / "folder.tif").mkdir()
    replace_in(style, 'source = "land.tif"', 'source = "folder.tif"')
    check_refused(style, tmp_path, 'layer "land-growth"', "not a regular file")


# --- 3. accepted what should be refused -----------------------------------------------------


def test_duplicate_layer_names_are_refused(style, tmp_path):
    style.write_text(style.read_text() + '\n[[layer]]\nname = "relief"\nrole = "ground"\n'
                     'kind = "relief"\nsource = "dem.tif"\n')
    check_refused(style, tmp_path, '"relief"', "twice")


def test_background_outside_srgb_is_refused(style, tmp_path):
    set_map(style, "background", "{ L = 50, C = 150, h = 20 }")
    check_refused(style, tmp_path, "map.background", "outside sRGB")


def test_negative_relief_strength_is_refused(style, tmp_path):
    replace_in(style, 'source = "dem.tif"', 'source = "dem.tif"\nstrength = -0.5')
    check_refused(style, tmp_path, 'layer "relief"', "strength")


def test_unknown_geopackage_table_is_refused(style, tmp_path):
    replace_in(style, 'table  = "coast"', 'table  = "shoreline"')
    check_refused(style, tmp_path, 'layer "coast"', "shoreline")


def test_every_layer_disabled_is_refused(tmp_path):
    path = tiny_style(tmp_path / "in", extra=False, overlays=False)
    text = path.read_text().replace('kind   = "', 'enabled = false\nkind   = "')
    path.write_text(text)
    check_refused(path, tmp_path, "no layers")


@pytest.mark.parametrize("name", ["....", "-rf", "a\\nb", "map\\u202egnp.exe", "x" * 300, " ", "a/b",
                                  "con\\u0000", ".hidden"])
def test_unsafe_map_names_are_refused(style, tmp_path, name):
    set_map(style, "name", f'"{name}"')
    line = check_refused(style, tmp_path, "map.name")
    assert "\n" not in line and "\u202e" not in line


def test_color_string_holding_a_newline_is_one_line(style, tmp_path):
    replace_in(style, 'stroke = "#2f3a44"', 'stroke = "#2f3a\\n44"')
    line = check_refused(style, tmp_path, 'layer "coast"', "stroke")
    assert "\\n" in line


def test_truncated_geotiff_is_reported_as_damaged(style, tmp_path):
    land = style.parent / "land.tif"
    data = land.read_bytes()
    land.write_bytes(data[:len(data) // 3])
    line = check_refused(style, tmp_path, 'layer "land-growth"', "land.tif")
    assert "no CRS" not in line
    assert "damaged" in line or "truncated" in line or "corrupt" in line or "cannot read" in line


def test_damaged_pixel_data_names_what_failed(style, tmp_path):
    """A GeoTIFF whose header reads but whose compressed pixels are damaged: the one line says
    what GDAL found (the block, the decoder), not "see previous exception"."""
    import rasterio
    land = style.parent / "land.tif"
    with rasterio.open(land) as src:           # deflated: damage shows as a decoding error
        profile, pixels = src.profile, src.read()
    profile.update(compress="deflate", tiled=True, blockxsize=16, blockysize=16)
    with rasterio.open(land, "w", **profile) as dst:
        dst.write(pixels)
    data = bytearray(land.read_bytes())
    for i in range(len(data) // 2, len(data) * 3 // 5, 3):
        data[i] = (data[i] * 31 + 7) % 256
    land.write_bytes(bytes(data))
    line = check_refused(style, tmp_path, 'layer "land-growth"', "land.tif")
    assert "previous exception" not in line


def test_garbage_tif_is_reported_as_unreadable(style, tmp_path):
    (style.parent / "land.tif").write_bytes(b"II*\x00" + b"\xff" * 200)
    line = check_refused(style, tmp_path, 'layer "land-growth"', "land.tif")
    assert "no CRS" not in line


# --- 4. exit codes --------------------------------------------------------------------------


def test_a_crash_is_exit_3_with_one_line_and_where_to_report(style, tmp_path, monkeypatch):
    import compose.engine

    def broken(*args, **kwargs):
        raise ZeroDivisionError("float division by zero")

    monkeypatch.setattr(compose.engine, "run", broken)
    monkeypatch.delenv("COMPOSE_DEBUG", raising=False)
    ended = run_in_process("check", style)
    line = ended.assert_one_line(3, "ZeroDivisionError", "report")
    assert line.startswith("compose: failed:")


def test_debug_shows_the_traceback(style, tmp_path, monkeypatch):
    import compose.engine

    def broken(*args, **kwargs):
        raise ZeroDivisionError("float division by zero")

    monkeypatch.setattr(compose.engine, "run", broken)
    monkeypatch.setenv("COMPOSE_DEBUG", "1")
    ended = run_in_process("check", style)
    assert ended.code == 3 and "Traceback" in ended.stderr


def test_library_warnings_never_precede_the_error_line(style, tmp_path, monkeypatch):
    import warnings

    import compose.engine

    def noisy(*args, **kwargs):
        warnings.warn("overflow encountered in multiply", RuntimeWarning, stacklevel=2)
        import logging
        logging.getLogger("rasterio._env").warning("CPLE_AppDefined in a warning from GDAL")
        from compose.errors import SourceError
        raise SourceError('layer "x": cannot read y.tif')

    monkeypatch.setattr(compose.engine, "run", noisy)
    monkeypatch.delenv("COMPOSE_DEBUG", raising=False)
    run_in_process("check", style).assert_one_line(2, 'layer "x"')


def test_failed_rule_is_exit_1_and_pass_is_0(tmp_path):
    styles = Path(__file__).resolve().parents[2] / "styles"
    assert run_in_process("check", styles / "poor.toml").code == 1


def test_a_failing_render_prints_its_error_line_alone_even_after_a_rounded_extent(tmp_path):
    # A rounded extent is a note of a successful run; a run that then fails (here a missing
    # source) prints only its one error line.
    style = tiny_style(tmp_path / "d")
    replace_in(style, "extent     = [500000, 4000000, 501920, 4001920]",
               "extent     = [500000, 4000000, 501925, 4001925]")
    replace_in(style, 'source = "land.tif"', 'source = "gone.tif"')
    run_in_process("render", style, "--out", tmp_path / "out").assert_one_line(2, "gone.tif")
