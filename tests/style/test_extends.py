"""extends: table merge key by key, layers by name, paths relative to their own file, cycles."""
from __future__ import annotations

import pytest

from compose.errors import StyleError
from compose.style import load_style
from tests.style.conftest import MAP


def lay(name: str, kind: str = "lines", extra: str = "") -> str:
    role = "theme" if kind in ("field", "classes") else "overlay"
    return f'[[layer]]\nname = "{name}"\nrole = "{role}"\nkind = "{kind}"\nsource = "{name}.gpkg"\n{extra}\n'


BASE = MAP + '''
title = "Base"
dpi = 200

[budget.ground]
lightness = [60, 95]
chroma = [0, 10]

[ramp.land]
kind = "sequential"
domain = [0, 10]
through = [{L = 95, C = 12, h = 95}, {L = 25, C = 25, h = 150}]

[[layer]]
name = "relief"
role = "ground"
kind = "relief"
source = "data/dem.tif"
tint = "#eeeeee"
shade = { azimuth = 300, altitude = 30 }
''' + lay("a") + lay("b") + lay("c")


@pytest.fixture
def base(write):
    return write("base/base.toml", BASE)


def names(style) -> list[str]:
    return [layer.name for layer in style.layers]


def test_tables_merge_key_by_key(write, base, tmp_path):
    path = write("top.toml", '''
        extends = "base/base.toml"
        [map]
        title = "Top"
        [budget.ground]
        chroma = [0, 8]
        [ramp.land]
        domain = [0, 20]
        [ramp.sea]
        twin = "land"
        hue = [215, 240]
        ''')
    s = load_style(path)
    assert (s.map.title, s.map.dpi, s.map.pixel) == ("Top", 200.0, 30.0)
    assert s.budgets.ground.lightness == (60.0, 95.0) and s.budgets.ground.chroma == (0.0, 8.0)
    land = s.ramps["land"]
    assert land.table["domain"] == (0, 20) and land.table["kind"] == "sequential"
    assert land.path == path and s.ramps["sea"].path == path
    assert list(s.ramps) == ["land", "sea"]
    assert names(s) == ["relief", "a", "b", "c"]
    assert s.name == "top" and s.chain == (base, path)
    assert s.text.lstrip().startswith('extends = "base/base.toml"')


def test_layer_override_in_place_and_paths_from_their_file(write, base, tmp_path):
    path = write("top.toml", '''
        extends = "base/base.toml"
        [[layer]]
        name = "relief"
        strength = 0.3
        shade = { azimuth = 200 }
        [[layer]]
        name = "b"
        source = "mine/b.gpkg"
        width = 2
        ''')
    s = load_style(path)
    assert names(s) == ["relief", "a", "b", "c"]
    relief, a, b, _ = s.layers
    assert relief.source == tmp_path / "base" / "data" / "dem.tif"     # relative to base.toml
    assert relief.options.strength == 0.3
    assert relief.options.tint == pytest.approx((0xee / 255,) * 3)     # kept from the base
    # a stated sub-table replaces the base's whole: altitude falls back to the default
    assert (relief.options.azimuth, relief.options.altitude) == (200.0, 45.0)
    assert a.source == tmp_path / "base" / "a.gpkg"
    assert b.source == tmp_path / "mine" / "b.gpkg"                    # relative to top.toml
    assert b.options.width == 2.0 and b.kind == "lines"


def test_new_layers_go_above_the_previous_listed_one(write, base):
    path = write("top.toml", '''
        extends = "base/base.toml"
        [[layer]]
        name = "top1"
        role = "overlay"
        kind = "points"
        source = "t.gpkg"
        [[layer]]
        name = "relief"
        [[layer]]
        name = "x"
        role = "theme"
        kind = "field"
        source = "x.tif"
        ramp = "land"
        [[layer]]
        name = "y"
        role = "overlay"
        kind = "lines"
        source = "y.gpkg"
        [[layer]]
        name = "b"
        [[layer]]
        name = "z"
        role = "overlay"
        kind = "lines"
        source = "z.gpkg"
        ''')
    # top1 comes first in the extending file: on top; x directly above relief, y above x; z above b
    assert names(load_style(path)) == ["relief", "x", "y", "a", "b", "z", "c", "top1"]


def test_enabled_false_drops_and_chain_can_re_enable(write, base):
    mid = write("mid.toml", '''
        extends = "base/base.toml"
        [[layer]]
        name = "a"
        enabled = false
        [[layer]]
        name = "c"
        enabled = false
        ''')
    assert names(load_style(mid)) == ["relief", "b"]
    top = write("top.toml", '''
        extends = "mid.toml"
        [[layer]]
        name = "a"
        enabled = true
        [map]
        title = "Three"
        ''')
    s = load_style(top)
    assert names(s) == ["relief", "a", "b"]                 # back in the base's position
    assert s.map.title == "Three" and s.map.dpi == 200.0
    assert s.chain == (base, mid, top)


def test_disabled_new_layer_is_not_validated(write, base):
    path = write("top.toml", 'extends = "base/base.toml"\n[[layer]]\nname = "sketch"\nenabled = false\n')
    assert names(load_style(path)) == ["relief", "a", "b", "c"]


def test_ramps_from_base_and_ramp_library(write):
    lib = load_style(write("lib/ramps.toml", '[ramp.sst]\nkind = "sequential"\n'), require_map=False)
    assert lib.map is None and list(lib.ramps) == ["sst"]
    path = write("s.toml", 'extends = "lib/ramps.toml"\n' + MAP + lay("t", "field", 'ramp = "sst"'))
    s = load_style(path)
    assert s.layers[0].options.ramp == "sst" and s.ramps["sst"].base_dir.name == "lib"
    bad = write("s2.toml", 'extends = "lib/ramps.toml"\n' + MAP + lay("t", "field", 'ramp = "sstt"'))
    with pytest.raises(StyleError, match="s2.toml: layer \"t\": unknown ramp 'sstt'; ramps: sst; library: "):
        load_style(bad)


def test_errors_in_merged_layers_name_the_layer(write, base):
    path = write("top.toml", 'extends = "base/base.toml"\n[[layer]]\nname = "relief"\nazimut = 3\n')
    with pytest.raises(StyleError, match="top.toml: unknown key 'azimut' in layer \"relief\""):
        load_style(path)


def test_shape_errors_name_the_file_that_has_them(write):
    write("base.toml", "[map]\nttle = 1\n")
    path = write("top.toml", 'extends = "base.toml"\n')
    with pytest.raises(StyleError, match="base.toml: unknown key 'ttle' in map"):
        load_style(path)
    write("base.toml", "[[layer]]\nname = 'a'\n[[layer]]\nname = 'a'\n")
    with pytest.raises(StyleError, match="base.toml: layer \"a\" is listed twice"):
        load_style(path)
    write("base.toml", "[map\n")
    with pytest.raises(StyleError, match="base.toml: invalid TOML"):
        load_style(path)


def test_cycles(write):
    a = write("a.toml", 'extends = "sub/b.toml"\n')
    write("sub/b.toml", 'extends = "../a.toml"\n')
    with pytest.raises(StyleError, match=r"extends cycle: .*a\.toml -> .*b\.toml -> .*a\.toml"):
        load_style(a)
    me = write("me.toml", 'extends = "me.toml"\n')
    with pytest.raises(StyleError, match="extends cycle"):
        load_style(me)


def test_missing_base_and_bad_extends(write):
    path = write("top.toml", 'extends = "nothere.toml"\n')
    with pytest.raises(StyleError, match="top.toml: extends: file not found: .*nothere.toml"):
        load_style(path)
    path = write("top2.toml", "extends = 3\n")
    with pytest.raises(StyleError, match="top2.toml: extends must be a non-empty string, got 3"):
        load_style(path)
