"""Validation messages: unknown keys with suggestions, types, ranges, missing keys, choices, colours."""
from __future__ import annotations

import colour
import numpy as np
import pytest

from compose.errors import ColorError, StyleError
from compose.style import load_style
from compose.style.validate import Scope, check_choice, check_keys, number, pair, suggest
from tests.conftest import assert_colors_close
from tests.style.conftest import MAP, RELIEF


def layer(extra: str, kind: str = "lines", name: str = "coast") -> str:
    return f'''
[[layer]]
name   = "{name}"
role   = "overlay"
kind   = "{kind}"
source = "v.gpkg"
{extra}
'''


def error(style, body: str, **kw) -> str:
    with pytest.raises(StyleError) as info:
        load_style(style(body, **kw))
    msg = str(info.value)
    assert "\n" not in msg
    return msg


# --- helpers -------------------------------------------------------------------------------

def test_scope_paths():
    top = Scope()
    assert top.at("map").at("extent").path == "map.extent"
    lay = Scope('layer "relief"')
    assert lay.path == 'layer "relief"' and lay.here == 'layer "relief"'
    assert lay.at("width").path == 'layer "relief": width'
    assert lay.at("shade").at("azimuth").path == 'layer "relief": shade.azimuth'
    assert lay.at("shade").here == 'layer "relief".shade'
    assert top.here == "the style"


def test_suggest_and_check_keys():
    assert suggest("azimut", ["azimuth", "altitude"]) == "azimuth"
    assert suggest("zzz", ["azimuth"]) is None
    with pytest.raises(StyleError, match=r"^unknown key 'colr' in map; did you mean 'color'\?$"):
        check_keys({"colr": 1}, ["color", "width"], Scope("", ("map",)))
    with pytest.raises(StyleError, match="known keys: color, width$"):
        check_keys({"zzz": 1}, ["width", "color"], Scope("", ("map",)))


def test_check_choice_lists_choices():
    with pytest.raises(StyleError) as info:
        check_choice("overlayy", ["normal", "multiply"], Scope('layer "x"').at("blend"), "blend mode")
    assert str(info.value) == "layer \"x\": blend: 'overlayy' is not a blend mode; one of: normal, multiply"


def test_number_readers():
    at = Scope('layer "coast"').at("width")
    with pytest.raises(StyleError, match=r"^layer \"coast\": width must be a number, got 'thin'$"):
        number(gt=0)("thin", at)
    with pytest.raises(StyleError, match="must be a number, got True"):
        number()(True, at)                                   # TOML booleans are not numbers
    with pytest.raises(StyleError, match="must be a number, got nan"):
        number()(float("nan"), at)
    with pytest.raises(StyleError, match=r"must be > 0, got -1"):
        number(gt=0)(-1, at)
    with pytest.raises(StyleError, match=r"must be between 0 and 1, got 1.5"):
        number(ge=0, le=1)(1.5, at)
    assert number(gt=0)(2, at) == 2.0 and isinstance(number()(2, at), float)
    with pytest.raises(StyleError, match=r"need low <= high"):
        pair(ge=0, le=100)([90, 60], at)
    with pytest.raises(StyleError, match=r"must be 2 numbers \[low, high\]"):
        pair()([1], at)


# --- through the loader ----------------------------------------------------------------------

def test_invalid_toml_names_file_and_line(write):
    path = write("style.toml", '[map]\ncrs = "EPSG:32631"\npixel = \nextent = [0, 0, 1, 1]\n')
    with pytest.raises(StyleError) as info:
        load_style(path)
    msg = str(info.value)
    assert "style.toml: invalid TOML:" in msg and "line 3" in msg


def test_missing_file(tmp_path):
    with pytest.raises(StyleError, match="style file not found: .*nope.toml"):
        load_style(tmp_path / "nope.toml")


def test_unknown_key_in_shade_subtable(style):
    msg = error(style, RELIEF + "shade = { azimut = 300 }\n")
    assert msg.endswith("unknown key 'azimut' in layer \"relief\".shade; did you mean 'azimuth'?")
    assert "style.toml: unknown key" in msg


@pytest.mark.parametrize("body, part", [
    (RELIEF + "tnt = '#ffffff'\n", "unknown key 'tnt' in layer \"relief\"; did you mean 'tint'?"),
    (RELIEF + "opactiy = 0.5\n", "unknown key 'opactiy' in layer \"relief\"; did you mean 'opacity'?"),
    (RELIEF + "width = 1\n", "unknown key 'width' in layer \"relief\"; 'width' is a key of lines, "
                             "areas, points, contours layers, not relief"),
    ("[budget.grund]\nchroma = [0, 5]\n" + RELIEF, "unknown key 'grund' in budget; did you mean 'ground'?"),
    ("[budget.theme]\nmargn = 5\n" + RELIEF, "unknown key 'margn' in budget.theme; did you mean 'margin'?"),
    ("[[layers]]\nname = 'x'\n", "unknown key 'layers' in the style; did you mean 'layer'?"),
    (layer("halo = { colour = '#fff' }"), "unknown key 'colour' in layer \"coast\".halo; did you mean 'color'?"),
])
def test_unknown_keys(style, body, part):
    assert part in error(style, body)


def test_unknown_key_in_map(style):
    msg = error(style, RELIEF, map_=MAP + "tittle = 'x'\n")
    assert "unknown key 'tittle' in map; did you mean 'title'?" in msg


@pytest.mark.parametrize("body, part", [
    (layer("width = 'thin'"), "layer \"coast\": width must be a number, got 'thin'"),
    (layer("width = 0"), "layer \"coast\": width must be > 0 and <= 500, got 0"),
    (layer("opacity = 2"), "layer \"coast\": opacity must be between 0 and 1, got 2"),
    (layer("dash = [1, 2, 3]"), "layer \"coast\": dash must be a list of an even count of numbers"),
    (layer("where = { class = {a = 1} }"), "layer \"coast\": where.class must be a value or a list"),
    (layer("halo = 3"), "layer \"coast\": halo must be a table, got 3"),
    (layer("enabled = 'no'"), "layer \"coast\": enabled must be true or false, got 'no'"),
    (RELIEF + "band = 1.5\n", "layer \"relief\": band must be a whole number, got 1.5"),
    (RELIEF + "shade = { altitude = 95 }\n", "layer \"relief\": shade.altitude must be > 0 and <= 90, got 95"),
    (RELIEF + "shade = 45\n", "layer \"relief\": shade must be a table, got 45"),
    (RELIEF + "resampling = 'linear'\n", "layer \"relief\": resampling: 'linear' is not a resampling "
                                         "method; one of: nearest, bilinear, cubic, average, mode"),
    (layer("blend = 'overlayy'"), "layer \"coast\": blend: 'overlayy' is not a blend mode; one of: "
                                  "normal, multiply, screen, overlay, soft-light"),
    (layer("", kind="line"), "layer \"coast\": kind: 'line' is not a layer kind; one of: relief, field, "
                             "classes, lines, areas, points, labels"),
    (layer("shape = 'star'", kind="points"), "'star' is not a marker shape; one of: circle, square"),
    (layer("text = 'n'\nweight = 950", kind="labels"), "layer \"coast\": weight must be between 100 and 900"),
    ("[budget.ground]\nlightness = [0, 120]\n" + RELIEF, "budget.ground.lightness must be between 0 and 100"),
    ("[budget.classes]\ncount = [5.5, 9]\n" + RELIEF, "budget.classes.count must be 2 whole numbers"),
    ("[budget.overlay]\ncontrast = 30\n" + RELIEF, "budget.overlay.contrast must be between 1 and 21"),
    ("[budget]\nground = 3\n" + RELIEF, "budget.ground must be a table, got 3"),
    ("[ramp]\nland = 3\n" + RELIEF, "ramp.land must be a table, got 3"),
])
def test_wrong_types_and_ranges(style, body, part):
    assert part in error(style, body)


def test_layer_not_array_of_tables(style):
    assert "layer must be an array of tables" in error(style, "layer = 3\n" + MAP, map_="")


@pytest.mark.parametrize("map_, part", [
    ("[map]\ncrs = 'EPSG:32631'\nextent = [0, 0, 1]\npixel = 1\n",
     "map.extent must be 4 numbers [west, south, east, north]"),
    ("[map]\ncrs = 'EPSG:32631'\nextent = [0, 0, 'a', 1]\npixel = 1\n",
     "map.extent must be 4 numbers [west, south, east, north]"),
    ("[map]\ncrs = 'EPSG:32631'\nextent = [10, 0, 0, 1]\npixel = 1\n",
     "map.extent: need west < east and south < north"),
    ("[map]\ncrs = 'EPSG:32631'\nextent = [0, 0, 1, 1]\npixel = 0\n", "map.pixel must be > 0, got 0"),
    ("[map]\ncrs = 'EPSG:32631'\nextent = [0, 0, 1, 1]\npixel = 1\ndpi = -3\n", "map.dpi must be between 10 and 10000"),
    ("[map]\ncrs = 'EPSG:999999'\nextent = [0, 0, 1, 1]\npixel = 1\n",
     "map.crs: 'EPSG:999999' is not a CRS pyproj understands"),     # no such code in the EPSG registry
    ("[map]\ncrs = 32631\nextent = [0, 0, 1, 1]\npixel = 1\n", "map.crs must be a CRS string"),
    ("[map]\ncrs = 'EPSG:32631'\n", "map: missing keys 'extent', 'pixel'"),
    ("[map]\nname = 'a/b'\ncrs = 'EPSG:32631'\nextent = [0, 0, 1, 1]\npixel = 1\n",
     "map.name must be a file name without folders"),
    ("", "no [map] table"),
])
def test_map_errors(style, map_, part):
    assert part in error(style, RELIEF, map_=map_)


def test_missing_layer_keys(style):
    assert 'layer "coast": missing keys \'role\', \'source\'' in error(
        style, '[[layer]]\nname = "coast"\nkind = "lines"\n')
    assert 'layer "sst": missing keys \'source\', \'ramp\'' in error(
        style, '[[layer]]\nname = "sst"\nrole = "theme"\nkind = "field"\n')
    assert 'layer "x": missing key \'kind\'' in error(
        style, '[[layer]]\nname = "x"\nrole = "theme"\nsource = "a.tif"\n')
    assert "layer 2: missing key 'name'" in error(style, RELIEF + '[[layer]]\nrole = "theme"\n')


def test_duplicate_layer_names(style):
    assert 'style.toml: layer "relief" is listed twice' in error(style, RELIEF + RELIEF)


def test_no_layers(style):
    assert "style.toml: the style has no layers" in error(style, "")
    assert "no layers" in error(style, RELIEF + "enabled = false\n")


def test_unknown_ramp_lists_ramps(style):
    ramps = "".join(f'[ramp.{n}]\nkind = "sequential"\n' for n in ("c", "a", "b"))
    body = ramps + '[[layer]]\nname = "sst"\nrole = "theme"\nkind = "field"\nsource = "s.tif"\nramp = "sstt"\n'
    assert "layer \"sst\": unknown ramp 'sstt'; ramps: a, b, c; library: change, cover" in error(style, body)
    body = '[[layer]]\nname = "c"\nrole = "theme"\nkind = "classes"\nsource = "c.tif"\nramp = "x"\n'
    assert "unknown ramp 'x'; ramps: none are defined" in error(style, body)


def test_colors_hex_and_lch(style):
    s = load_style(style(layer('stroke = "#336699"\nhalo = { color = { L = 50, C = 30, h = 200 } }')))
    o = s.layers[0].options
    # CSS Color Module Level 4, hex notation: each pair is one 8-bit channel
    assert o.stroke == pytest.approx((0x33 / 255, 0x66 / 255, 0x99 / 255))
    # CIE LCh(ab) D65 -> sRGB by colour-science (reference library); the engine's 4-digit IEC matrix
    # differs from colour-science's derived one by ~1e-4 in sRGB, far below 0.05 dE00
    lab = colour.LCHab_to_Lab(np.array([50.0, 30.0, 200.0]))
    ref = colour.XYZ_to_sRGB(colour.Lab_to_XYZ(lab))
    assert_colors_close(o.halo.color, ref, max_delta_e=0.05)


def test_out_of_gamut_lch_names_the_key(style):
    # L* 50, C* 120, h 140 is outside sRGB: colour-science's conversion leaves [0, 1]
    lab = colour.LCHab_to_Lab(np.array([50.0, 120.0, 140.0]))
    rgb = colour.XYZ_to_sRGB(colour.Lab_to_XYZ(lab))
    assert rgb.min() < 0 or rgb.max() > 1
    with pytest.raises(ColorError) as info:
        load_style(style(layer("stroke = { L = 50, C = 120, h = 140 }")))
    msg = str(info.value)
    assert 'layer "coast": stroke: {L = 50, C = 120, h = 140} is outside sRGB' in msg
    assert "style.toml: layer" in msg


def test_bad_color_string_names_the_key(style):
    with pytest.raises(ColorError, match=r"layer \"relief\": tint: 'biege' is not a colour "
                                         r"\(did you mean 'beige'\?\)"):
        load_style(style(RELIEF + "tint = 'biege'\n"))
    assert load_style(style(RELIEF + "tint = 'beige'\n")).layers[0].options.tint == \
        (245 / 255, 245 / 255, 220 / 255)          # a CSS Color 4 name
    with pytest.raises(ColorError, match=r"map.background: '#12' is not a colour"):
        load_style(style(RELIEF, map_=MAP + "background = '#12'\n"))


# --- role x kind (issue 10: a relief as "overlay" silently skipped the ground rules) ----------

@pytest.mark.parametrize("kind, role, allowed", [
    ("relief", "overlay", "ground"),
    ("relief", "theme", "ground"),
    ("field", "overlay", "theme, ground"),
    ("classes", "overlay", "theme, ground"),
    ("lines", "ground", "overlay"),
    ("points", "theme", "overlay"),
    ("labels", "ground", "overlay"),
    ("areas", "theme", "overlay, ground"),
])
def test_role_kind_pairs_outside_the_allowed_ones_are_errors(style, kind, role, allowed):
    body = (f'[ramp.r]\nkind = "sequential"\ndomain = [0, 1]\n'
            f'through = [{{L = 90, C = 10, h = 90}}, {{L = 40, C = 40, h = 140}}]\n'
            f'[[layer]]\nname = "x"\nrole = "{role}"\nkind = "{kind}"\nsource = "x.tif"\n'
            + ('ramp = "r"\n' if kind in ("field", "classes") else "")
            + ('text = "name"\n' if kind == "labels" else ""))
    msg = error(style, body)
    assert f'layer "x": role: a {kind} layer cannot be {role!r}' in msg
    assert msg.endswith(f"allowed: {allowed}")


@pytest.mark.parametrize("kind, role", [("relief", "ground"), ("field", "theme"), ("field", "ground"),
                                        ("classes", "ground"), ("lines", "overlay"),
                                        ("areas", "ground"), ("areas", "overlay"),
                                        ("points", "overlay"), ("labels", "overlay")])
def test_allowed_role_kind_pairs_load(style, kind, role):
    body = (f'[ramp.r]\nkind = "sequential"\ndomain = [0, 1]\n'
            f'through = [{{L = 90, C = 10, h = 90}}, {{L = 40, C = 40, h = 140}}]\n'
            f'[[layer]]\nname = "x"\nrole = "{role}"\nkind = "{kind}"\nsource = "x.tif"\n'
            + ('ramp = "r"\n' if kind in ("field", "classes") else "")
            + ('text = "name"\n' if kind == "labels" else ""))
    assert load_style(style(body)).layers[0].role == role
