"""Loading a good style into dataclasses: values, defaults, paths, ramps, ramp libraries."""
from __future__ import annotations

from dataclasses import FrozenInstanceError
from pathlib import Path

import pytest
from affine import Affine

from compose.color.lab import srgb_to_lch
from compose.errors import StyleError
from compose.style import (
    LAYER_KINDS,
    AreaOptions,
    ClassesOptions,
    FieldOptions,
    Halo,
    LabelOptions,
    LineOptions,
    PointOptions,
    ReliefOptions,
    default_shadow,
    load_style,
)

FULL = '''
[map]
name       = "coastmap"
title      = "Productivity, land and water"
crs        = "EPSG:32631"
extent     = [500000, 4000000, 503000, 4002000]
pixel      = 30
dpi        = 150
background = "#fafafa"

[budget.ground]
lightness = [60, 97]
[budget.theme]
chroma = [20, 110]
[budget.overlay]
contrast = 4
viewing_distance = 500
[budget.classes]
count = [3, 7]

[ramp.land]
kind    = "sequential"
through = [{L = 95, C = 12, h = 95}, {L = 25, C = 25, h = 150}]
[ramp.cover]
kind    = "qualitative"
classes = [{ value = 1, label = "Pine", color = {L = 45, C = 30, h = 140} }]

[[layer]]
name    = "relief"
role    = "ground"
kind    = "relief"
source  = "../data/elevation.tif"
blend   = "multiply"
shade   = { azimuth = 300, altitude = 35, exaggeration = 2, directions = 3 }
tint    = "#efeae0"
shadow  = { L = 40, C = 4, h = 80 }
strength = 0.5

[[layer]]
name   = "productivity"
role   = "theme"
kind   = "field"
source = "prod.tif"
band   = 2
ramp   = "land"
nodata = "transparent"
opacity = 0.8

[[layer]]
name   = "cover"
role   = "theme"
kind   = "classes"
source = "cover.tif"
ramp   = "cover"
enabled = true

[[layer]]
name   = "coast"
role   = "overlay"
kind   = "lines"
source = "vectors.gpkg"
table  = "coastline"
where  = { class = ["coast", "island"], level = 1 }
stroke = { L = 25, C = 6, h = 240 }
width  = 0.8
dash   = [2, 1]
halo   = { color = "#fbfaf6", width = 1.6 }

[[layer]]
name   = "parks"
role   = "overlay"
kind   = "areas"
source = "vectors.gpkg"
fill   = "#cde"
width  = 0

[[layer]]
name   = "towns"
role   = "overlay"
kind   = "points"
source = "/abs/towns.gpkg"
size   = 5
shape  = "square"

[[layer]]
name     = "names"
role     = "overlay"
kind     = "labels"
source   = "vectors.gpkg"
text     = "name"
priority = "population"
size     = 9
halo     = { width = 2 }
weight   = 600
'''


@pytest.fixture
def full(write):
    return load_style(write("maps/full.toml", FULL))


def test_map_and_name(full, tmp_path):
    m = full.map
    assert full.name == "coastmap"
    assert full.path == tmp_path / "maps" / "full.toml"
    assert m.title == "Productivity, land and water"
    assert m.crs == "EPSG:32631"
    assert m.extent == (500000.0, 4000000.0, 503000.0, 4002000.0)
    assert (m.pixel, m.dpi) == (30.0, 150.0)
    assert m.background == pytest.approx((0xfa / 255,) * 3)     # CSS Color 4 hex notation
    assert full.text.startswith("\n[map]\nname")                 # the raw text, unparsed


def test_canvas_from_map(full):
    c = full.canvas()
    assert (c.width, c.height, c.dpi) == (100, 67, 150.0)        # ceil(3000/30), ceil(2000/30)
    assert c.transform == Affine(30, 0, 500000, 0, -30, 4002000)


def test_budgets_stated_and_default(full, style):
    b = full.budgets
    assert b.ground.lightness == (60.0, 97.0) and b.ground.chroma == (0.0, 12.0)
    assert b.theme.chroma == (20.0, 110.0) and b.theme.chroma_min_stated
    assert b.theme.margin == 10.0
    assert (b.overlay.contrast, b.overlay.label_contrast) == (4.0, 4.5)
    assert (b.overlay.share, b.overlay.viewing_distance) == (0.95, 500.0)
    assert b.classes.count == (3, 7) and isinstance(b.classes.count[0], int)
    assert (b.nodata.chroma, b.nodata.separation) == (3.0, 10.0)
    d = load_style(style()).budgets
    assert d.theme.chroma == (25.0, 130.0) and not d.theme.chroma_min_stated
    assert d.ground.lightness == (55.0, 98.0)
    assert d.overlay.contrast == 3.0 and d.overlay.label_contrast == 4.5   # WCAG 2.1 SC 1.4.11 / 1.4.3


def test_layers_in_file_order_with_options(full, tmp_path):
    names = [layer.name for layer in full.layers]
    assert names == ["relief", "productivity", "cover", "coast", "parks", "towns", "names"]
    kinds = {layer.name: type(layer.options) for layer in full.layers}
    assert kinds == {"relief": ReliefOptions, "productivity": FieldOptions, "cover": ClassesOptions,
                     "coast": LineOptions, "parks": AreaOptions, "towns": PointOptions,
                     "names": LabelOptions}
    relief, prod, cover, coast, parks, towns, names_ = full.layers
    assert relief.source == tmp_path / "data" / "elevation.tif"     # relative to the style file
    assert relief.source.is_absolute() and not relief.source.exists()
    assert towns.source == Path("/abs/towns.gpkg")
    assert relief.blend == "multiply" and relief.role == "ground" and relief.enabled
    o = relief.options
    assert (o.azimuth, o.altitude, o.exaggeration, o.directions) == (300.0, 35.0, 2.0, 3)
    assert o.strength == 0.5 and o.resampling == "bilinear" and o.band == 1
    assert srgb_to_lch(o.shadow)[0] == pytest.approx(40, abs=0.01)
    assert prod.options.band == 2 and prod.options.nodata == "transparent"
    assert prod.opacity == 0.8 and prod.blend == "normal"
    assert cover.options.resampling == "mode" and cover.options.ramp == "cover"
    c = coast.options
    assert c.table == "coastline" and c.width == 0.8 and c.dash == (2.0, 1.0)
    assert dict(c.where) == {"class": ("coast", "island"), "level": (1,)}
    assert c.halo == Halo(color=c.halo.color, width=1.6)
    assert parks.options.fill == pytest.approx((0xcc / 255, 0xdd / 255, 0xee / 255))  # "#cde" = "#ccddee"
    assert parks.options.width == 0.0 and parks.options.table is None
    assert towns.options.shape == "square" and towns.options.size == 5.0
    n = names_.options
    assert (n.text, n.priority, n.size, n.weight, n.font, n.offset) == \
        ("name", "population", 9.0, 600, "DejaVu Sans", 3.0)
    assert n.halo.width == 2.0 and n.halo.color == (1.0, 1.0, 1.0)


def test_defaults_of_each_kind():
    # every kind's options build from the required keys alone
    required = {"field": {"ramp": "r"}, "classes": {"ramp": "r"}, "labels": {"text": "name"},
                "contours": {"interval": 10.0}}
    for kind, schema in LAYER_KINDS.items():
        opts = schema.options(**required.get(kind, {}))
        assert opts is not None
    r = ReliefOptions()
    assert (r.azimuth, r.altitude, r.exaggeration, r.directions, r.strength) == (315, 45, 1, 1, 0.6)
    assert r.tint == pytest.approx((0xf3 / 255, 0xf0 / 255, 0xe8 / 255))
    assert r.shadow == default_shadow(r.tint)
    L0, C0, _ = srgb_to_lch(r.tint)
    L1, C1, _ = srgb_to_lch(r.shadow)
    assert L1 == pytest.approx(L0 / 2, abs=0.05) and C1 <= min(C0, 6) + 0.05   # our own rule
    assert FieldOptions(ramp="r").resampling == "bilinear"
    assert ClassesOptions(ramp="r").resampling == "mode"
    assert LineOptions().halo is None and dict(LineOptions().where) == {}


def test_values_are_frozen(full):
    with pytest.raises(FrozenInstanceError):
        full.layers[0].options.azimuth = 1
    with pytest.raises(TypeError):
        full.ramps["land"].table["kind"] = "diverging"
    with pytest.raises(TypeError):
        full.layers[3].options.where["x"] = (1,)


def test_ramps(full, tmp_path):
    assert list(full.ramps) == ["land", "cover"]
    land = full.ramps["land"]
    assert land.name == "land" and land.path == tmp_path / "maps" / "full.toml"
    assert land.base_dir == tmp_path / "maps"
    assert land.table["through"][1] == {"L": 25, "C": 25, "h": 150}
    assert isinstance(land.table["through"], tuple)


def test_name_defaults_to_stem(style):
    s = load_style(style(name="my_map.toml"))
    assert s.name == "my_map" and s.map.title == "" and s.map.dpi == 300.0
    assert s.map.background == (1.0, 1.0, 1.0)
    assert s.chain == (s.path,)


def test_ramp_library_without_map(write):
    path = write("ramps.toml", '''
        [ramp.land]
        kind = "sequential"
        through = [{L = 95, C = 12, h = 95}, {L = 25, C = 25, h = 150}]
        ''')
    s = load_style(path, require_map=False)
    assert s.map is None and s.layers == () and list(s.ramps) == ["land"]
    assert s.name == "ramps"
    with pytest.raises(StyleError, match=r"no \[map\]"):
        s.canvas()
    with pytest.raises(StyleError, match=r"ramps\.toml: no \[map\] table.*map\.crs"):
        load_style(path)


def test_require_map_false_still_validates_map(write):
    path = write("s.toml", '[map]\ncrs = "EPSG:4326"\n')
    with pytest.raises(StyleError, match="map: missing keys 'extent', 'pixel'"):
        load_style(path, require_map=False)


def test_relative_path_argument(style, monkeypatch, tmp_path):
    style()
    monkeypatch.chdir(tmp_path)
    s = load_style("style.toml")
    assert s.path == tmp_path / "style.toml"
    assert s.layers[0].source == tmp_path / "dem.tif"


def test_geographic_crs(style):
    # pyproj accepts any CRS string form; WGS 84 by EPSG code (EPSG registry, code 4326)
    s = load_style(style(map_='[map]\ncrs = "EPSG:4326"\nextent = [2, 41, 3, 42]\npixel = 0.01\n'))
    assert s.canvas().width == 100
