"""sRGB gamut test and gamut mapping by chroma reduction at constant L* and hue.

The rule (reduce C*ab at constant L* and h, never clip channels) is the engine's own convention
(docs/color.md); the checks here are properties plus the sRGB cube's corners, whose LCh lie on the
gamut boundary by definition (IEC 61966-2-1 gamut = the RGB unit cube). Tags: SRC, SRC-2, CALC, MEM.
"""
from __future__ import annotations

import colour
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from compose.color.gamut import GAMUT_TOLERANCE, in_gamut, lch_in_gamut, map_to_gamut, max_chroma
from compose.color.lab import lch_to_srgb, srgb_to_lch
from tests.conftest import angular_difference

lch_strategy = st.tuples(st.floats(0.0, 100.0), st.floats(0.0, 200.0), st.floats(0.0, 359.999)).map(np.array)
unit = st.floats(0.0, 1.0, allow_nan=False)

CORNERS = np.array([[1, 0, 0], [0, 1, 0], [0, 0, 1], [0, 1, 1], [1, 0, 1], [1, 1, 0]], dtype=float)


def test_in_gamut_tolerance_is_a_tenth_of_a_code():
    # Our convention: up to 0.1/255 outside [0, 1] counts as inside (rounding to 8 bits absorbs it).
    assert GAMUT_TOLERANCE == pytest.approx(0.1 / 255)
    assert in_gamut([0.0, 0.5, 1.0]) and in_gamut([1 + 0.09 / 255, -0.09 / 255, 0.5])
    assert not in_gamut([1 + 0.2 / 255, 0.5, 0.5]) and not in_gamut([-0.01, 0.5, 0.5])
    assert not in_gamut([np.nan, 0.5, 0.5])


def test_mapped_color_on_the_edge_stays_inside():
    # silver: found by hypothesis; the bisection stopped on the tolerance edge (R = 1 + 0.1/255)
    # and the mapped colour read as outside when converted again.
    out, _ = map_to_gamut(np.array((87.4851681740054, 87.25, 87.4921875)))
    assert bool(lch_in_gamut(out))


@settings(max_examples=200, deadline=None)
@given(lch_strategy)
def test_map_to_gamut_properties(lch):
    out, removed = map_to_gamut(lch)
    # Always lands in gamut.
    assert bool(lch_in_gamut(out))
    # L* (inside [0, 100]) and h unchanged (brief: 0.01; in fact exact), chroma only ever lowered.
    assert abs(out[0] - lch[0]) <= 0.01
    assert angular_difference(out[2], lch[2]) <= 0.01
    assert removed >= 0
    assert out[1] + removed == pytest.approx(lch[1], abs=1e-9)
    if bool(lch_in_gamut(lch)):
        assert removed == 0 and out[1] == lch[1]
    else:
        # Removed no more than needed: 0.01 more chroma would leave the gamut (bisection to ~2e-10).
        assert not bool(lch_in_gamut([out[0], out[1] + 0.01, out[2]]))


@settings(max_examples=200, deadline=None)
@given(st.tuples(unit, unit, unit).map(np.array))
def test_in_gamut_colors_are_untouched(rgb):
    # Any sRGB colour, taken to LCh, is in gamut and map_to_gamut removes nothing.
    lch = srgb_to_lch(rgb)
    assert bool(lch_in_gamut(lch))
    out, removed = map_to_gamut(lch)
    assert removed == 0.0
    np.testing.assert_array_equal(out, lch)


def test_max_chroma_at_cube_corners():
    # CALC: the six saturated corners of the RGB cube lie on the sRGB gamut boundary, so the largest
    # displayable chroma at their L* and h is their own chroma. The gamut tolerance (0.1/255 per
    # channel) lets a little more through: 0.1 C*ab.
    lch = srgb_to_lch(CORNERS)
    np.testing.assert_allclose(max_chroma(lch[:, 0], lch[:, 2]), lch[:, 1], rtol=0, atol=0.1)


def _scan_last_inside(L, h, step=0.05, cmax=200.0):
    """Largest C on a ``step`` grid whose sRGB channels stay in [-tol, 1 + tol], by colour-science's
    own LCh -> sRGB (colour.LCHab_to_Lab, Lab_to_XYZ, XYZ_to_sRGB)."""
    grid = np.arange(0, cmax, step)
    lch = np.stack(np.broadcast_arrays(np.asarray(L)[:, None], grid[None, :], np.asarray(h)[:, None]), axis=-1)
    rgb = colour.XYZ_to_sRGB(colour.Lab_to_XYZ(colour.LCHab_to_Lab(lch)))
    ok = np.all((rgb >= -GAMUT_TOLERANCE) & (rgb <= 1 + GAMUT_TOLERANCE), axis=-1)
    return grid[grid.size - 1 - np.argmax(ok[:, ::-1], axis=1)]


def test_max_chroma_against_colour_science_scan():
    # Independent dense scan (step 0.05) with colour-science. colour-science encodes with the
    # 4-digit published inverse matrix (moves channels by < 5e-4), so tolerance 0.3 C*ab.
    rng = np.random.default_rng(60)
    L = rng.uniform(5, 95, 40)
    h = rng.uniform(0, 360, 40)
    np.testing.assert_allclose(max_chroma(L, h), _scan_last_inside(L, h), rtol=0, atol=0.3)


def test_max_chroma_where_the_chroma_line_leaves_and_reenters_the_gamut():
    # CALC (dense scan, found while writing these tests): near the yellow corner a line of constant
    # L*, h leaves the cube and comes back, e.g. L* 96, h 102 is inside for C <= 40.6 and again for
    # 89.1 <= C <= 95.7. The largest displayable chroma is the far edge. A bisection over [0, C] used
    # to return the near edge (40.6), taking 55 units of chroma too many off bright yellows.
    L = np.array([95.0, 96.0, 97.0, 97.0])
    h = np.array([101.0, 102.0, 103.0, 104.0])
    ref = _scan_last_inside(L, h)
    np.testing.assert_allclose(ref, [94.6, 95.7, 96.8, 92.1], rtol=0, atol=0.1)
    np.testing.assert_allclose(max_chroma(L, h), ref, rtol=0, atol=0.3)
    out, removed = map_to_gamut(np.stack([L, np.full(4, 100.0), h], axis=-1))
    np.testing.assert_allclose(out[:, 1], ref, rtol=0, atol=0.3)
    assert np.all(lch_in_gamut(out))
    # The yellow corner itself (L* 97.14, h 102.85, C 96.92) lies on such a far edge.
    y = srgb_to_lch(np.array([1.0, 1.0, 0.0]))
    assert max_chroma(y[0], y[2]) == pytest.approx(y[1], abs=0.1)


def test_max_chroma_ends_of_lightness():
    # CALC: only neutral colours exist at L* = 0 (black) and L* = 100 (white).
    assert max_chroma(0.0, 40.0) < 0.1
    assert max_chroma(100.0, 200.0) < 0.5


def test_mapping_is_not_clipping():
    # Our rule (docs/color.md): chroma reduction keeps hue; clipping channels does not.
    lch = np.array([60.0, 120.0, 250.0])
    out, removed = map_to_gamut(lch)
    assert removed > 0
    rgb = lch_to_srgb(out)
    assert angular_difference(srgb_to_lch(np.clip(rgb, 0, 1))[2], 250.0) < 0.01
    clipped = np.clip(lch_to_srgb(lch), 0, 1)
    assert angular_difference(srgb_to_lch(clipped)[2], 250.0) > 1.0


def test_lightness_outside_range_is_clamped():
    # Our documented rule: L* outside [0, 100] is clamped, the only change to L*.
    out, removed = map_to_gamut(np.array([[120.0, 10.0, 30.0], [-5.0, 10.0, 30.0]]))
    np.testing.assert_array_equal(out[:, 0], [100.0, 0.0])
    assert np.all(lch_in_gamut(out))


def test_broadcasting_shape_2_2_2_2_3():
    # Vectorised over (..., 3): seeded (2, 2, 2, 2, 3) LCh equals its rows one at a time (1e-9:
    # bisection on the same values; an in-gamut row mapped alone short-cuts but gives the same).
    rng = np.random.default_rng(61)
    lch = rng.uniform([0, 0, 0], [100, 150, 360], (2, 2, 2, 2, 3))
    out, removed = map_to_gamut(lch)
    assert out.shape == lch.shape and removed.shape == (2, 2, 2, 2)
    rows = [map_to_gamut(r) for r in lch.reshape(-1, 3)]
    np.testing.assert_allclose(out.reshape(-1, 3), [r[0] for r in rows], rtol=0, atol=1e-9)
    np.testing.assert_allclose(removed.ravel(), [r[1] for r in rows], rtol=0, atol=1e-9)
    assert lch_in_gamut(lch).shape == (2, 2, 2, 2)
    assert max_chroma(lch[..., 0], lch[..., 2]).shape == (2, 2, 2, 2)
