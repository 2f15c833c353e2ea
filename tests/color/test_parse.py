"""Colour strings and {L, C, h} tables of a style file.

Hex notation: CSS Color Module Level 4, "#rrggbb" and the "#rgb" shorthand in which each digit is
doubled (MEM: W3C CSS Color 4, not re-read). LCh(ab) conversion checked against colour-science.
Tags: SRC, SRC-2, CALC, MEM.
"""
from __future__ import annotations

import colour
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from compose.color.lab import srgb_to_lch
from compose.color.parse import describe, parse_color, to_hex, to_rgb8
from compose.errors import ColorError, StyleError
from tests.conftest import angular_difference

WHERE = 'layer "coast": stroke'


@pytest.mark.parametrize("text, rgb8", [
    ("#000000", (0, 0, 0)),
    ("#ffffff", (255, 255, 255)),
    ("#1A2b3C", (0x1A, 0x2B, 0x3C)),
    ("#777777", (0x77, 0x77, 0x77)),
    ("#fa0", (0xFF, 0xAA, 0x00)),   # shorthand: each digit doubled (CSS Color 4, MEM)
    ("#FFF", (255, 255, 255)),
    ("  #123456 ", (0x12, 0x34, 0x56)),  # surrounding blanks of a TOML value are forgiven
])
def test_hex_forms(text, rgb8):
    # Exact: code / 255.
    assert parse_color(text, WHERE) == tuple(c / 255.0 for c in rgb8)


@pytest.mark.parametrize("bad", ["", "#", "#12", "#1234", "#12345", "#1234567", "#ggg", "123456",
                                 "rgb(1, 2, 3)", "nonsense", "#12 34 56"])
def test_bad_strings_raise_color_error_naming_where_and_value(bad):
    with pytest.raises(ColorError) as info:
        parse_color(bad, WHERE)
    msg = str(info.value)
    assert msg.startswith(WHERE + ":")
    assert f"'{bad}'" in msg
    assert "\n" not in msg                     # one-line messages (project rule)
    assert isinstance(info.value, StyleError)  # ColorError is a StyleError (compose.errors)


@pytest.mark.parametrize("bad", [None, 12, 0.5, [1, 2, 3], (0.1, 0.2, 0.3)])
def test_other_types_raise(bad):
    with pytest.raises(ColorError, match=WHERE):
        parse_color(bad, WHERE)


@pytest.mark.parametrize("table", [{"L": 50, "C": 10}, {"L": 50, "C": 10, "h": 0, "alpha": 1},
                                   {"l": 50, "c": 10, "h": 0}])
def test_table_needs_exactly_l_c_h(table):
    with pytest.raises(ColorError) as info:
        parse_color(table, WHERE)
    assert str(info.value).startswith(WHERE + ":") and "L, C, h" in str(info.value)


@pytest.mark.parametrize("table", [{"L": "fifty", "C": 10, "h": 0}, {"L": -1, "C": 10, "h": 0},
                                   {"L": 101, "C": 0, "h": 0}, {"L": 50, "C": -3, "h": 0},
                                   {"L": 50, "C": 3, "h": float("nan")}])
def test_table_values_checked(table):
    with pytest.raises(ColorError) as info:
        parse_color(table, WHERE)
    assert str(info.value).startswith(WHERE + ":")


def test_out_of_gamut_lch_raises_with_value_and_largest_chroma():
    # Our rule: never clipped. L* 50, h 30 (a red) cannot reach C 200; the message names the value
    # and the largest chroma that fits (cf. tests/color/test_gamut.py for that number).
    from compose.color.gamut import max_chroma

    with pytest.raises(ColorError) as info:
        parse_color({"L": 50, "C": 200, "h": 30}, WHERE)
    msg = str(info.value)
    assert msg.startswith(WHERE + ":")
    assert "{L = 50, C = 200, h = 30}" in msg and "outside sRGB" in msg
    assert f"{float(max_chroma(50, 30)):.1f}" in msg


@pytest.mark.parametrize("lch", [(60.0, 20.0, 120.0), (30.0, 40.0, 300.0), (90.0, 5.0, 80.0),
                                 (50.0, 0.0, 0.0), (53.0, 30.0, -20.0)])
def test_lch_table_matches_colour_science(lch):
    # Reference library: colour.XYZ_to_sRGB(colour.Lab_to_XYZ(colour.LCHab_to_Lab(lch))). colour-
    # science encodes with the published 4-digit inverse matrix, we with its exact inverse: < 5e-4
    # (CALC, tests/color/test_srgb.py). Hue -20 is the same as 340.
    got = parse_color({"L": lch[0], "C": lch[1], "h": lch[2]}, WHERE)
    ref = colour.XYZ_to_sRGB(colour.Lab_to_XYZ(colour.LCHab_to_Lab(np.array(lch))))
    np.testing.assert_allclose(got, ref, rtol=0, atol=5e-4)
    back = srgb_to_lch(np.array(got))
    assert back[0] == pytest.approx(lch[0], abs=1e-8)  # our own inverse: rounding only
    if lch[1] > 0:
        assert back[1] == pytest.approx(lch[1], abs=1e-8)
        assert angular_difference(back[2], lch[2]) <= 1e-8


def test_lch_table_at_the_gamut_edge_is_accepted_and_clipped_to_unit_range():
    # A colour within the gamut tolerance (0.1/255 per channel) is accepted; the returned floats are
    # in [0, 1]. Take the sRGB blue corner and nudge its chroma up by 0.01.
    L, C, h = srgb_to_lch(np.array([0.0, 0.0, 1.0]))
    rgb = parse_color({"L": L, "C": C + 0.01, "h": h}, WHERE)
    assert all(0.0 <= v <= 1.0 for v in rgb)
    assert to_hex(rgb) == "#0000ff"


@settings(max_examples=200, deadline=None)
@given(st.integers(0, 0xFFFFFF), st.booleans())
def test_hex_round_trip(code, upper):
    # to_hex(parse_color(s)) == s (lower case) for every 24-bit code: k/255 * 255 rounds back to k.
    text = f"#{code:06x}"
    src = text.upper() if upper else text
    assert to_hex(parse_color(src, WHERE)) == text


def test_to_rgb8_rounds_and_clips_only_slightly_outside():
    # Rounding to the nearest code; a fraction of a code outside [0, 1] clips to 0 / 255.
    np.testing.assert_array_equal(to_rgb8([0.0, 0.5, 1.0]), [0, 128, 255])
    np.testing.assert_array_equal(to_rgb8([-0.0001, 1.0001, 10.4 / 255]), [0, 255, 10])
    assert to_rgb8(np.zeros((2, 2, 2, 2, 3))).shape == (2, 2, 2, 2, 3)
    assert to_rgb8([0.2, 0.4, 0.6]).dtype == np.uint8


def test_describe():
    # #777777: L* 50.034, neutral (references.md §1, CALC); red: L* 53.233, C* = hypot(80.111, 67.224)
    # = 104.58, h = 40.0 (same table, colour-science column).
    assert describe(np.array([0x77, 0x77, 0x77]) / 255.0).startswith("#777777 (L* 50.0, C* 0.0, h ")
    assert describe((1.0, 0.0, 0.0)) == "#ff0000 (L* 53.2, C* 104.6, h 40)"
