"""Lookup tables: index layout (entries, under, over, nodata), stepped breaks, quantiles, packing."""
from __future__ import annotations

import numpy as np
import pytest

from compose.errors import ComposeError
from compose.ramps import quantile_breaks

from .conftest import lch, make

SEQ = {"kind": "sequential", "domain": [0, 12],
       "through": [lch(95, 12, 100), lch(60, 36, 135), lch(27, 20, 165)]}
WARM = {"kind": "threshold", "domain": [14, 30], "at": 26,
        "below": [lch(93, 10, 190), lch(62, 30, 240)], "above": [lch(62, 62, 58), lch(34, 52, 30)]}


def test_layout_of_a_continuous_table():
    lut = make(land=SEQ)["land"].lut()
    n = lut.n
    assert n == 1024 and lut.rgb8.shape == (n + 3, 3) and lut.lab.shape == (n + 3, 3)
    assert (lut.outside_low_index, lut.outside_high_index, lut.nodata_index) == (n, n + 1, n + 2)
    idx = lut.index(np.array([0.0, 12.0, -0.001, 12.001, np.nan, -np.inf, np.inf]))
    assert idx.dtype == np.uint16
    assert idx.tolist() == [0, n - 1, n, n + 1, n + 2, n, n + 1]
    np.testing.assert_allclose(lut.values[[0, -1]], [0, 12])


def test_continuous_index_is_the_nearest_entry():
    lut = make(land=SEQ)["land"].lut(samples=37)
    v = np.random.default_rng(3).uniform(0, 12, 5000)
    expected = np.argmin(np.abs(v[:, None] - lut.values[None, :]), axis=1)
    np.testing.assert_array_equal(lut.index(v), expected)
    # float32 rasters and any shape
    img = v.astype(np.float32).reshape(50, 100)
    assert lut.index(img).shape == (50, 100)


def test_lab_is_the_cielab_of_the_drawn_8bit_colors():
    import colour
    lut = make(land=SEQ)["land"].lut(samples=16)
    ref = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(lut.rgb8 / 255.0))
    np.testing.assert_allclose(lut.lab, ref, atol=2e-3)   # ours vs colour-science: same convention


def test_threshold_break_is_an_edge():
    ramp = make(warm=WARM)["warm"]
    lut = ramp.lut()
    at, first, _ = lut.split
    idx = lut.index(np.array([np.nextafter(26.0, 0), 26.0, 14.0, 30.0]))
    assert idx[0] == first - 1 and idx[1] == first and idx[2] == 0 and idx[3] == lut.n - 1
    assert lut.edges[first] == 26.0
    # every entry is drawn in the colour of its own side of the break
    hue = np.degrees(np.arctan2(lut.lab[:lut.n, 2], lut.lab[:lut.n, 1])) % 360
    assert np.all((hue[:first] > 150) & (hue[:first] < 260))
    assert np.all((hue[first:] < 80) | (hue[first:] > 340))
    # searchsorted reference on the edges for random values
    v = np.random.default_rng(1).uniform(14, 30, 4000)
    ref = np.clip(np.searchsorted(lut.edges, v, side="right") - 1, 0, lut.n - 1)
    np.testing.assert_array_equal(lut.index(v), ref)


def test_explicit_breaks():
    ramp = make(land={**SEQ, "domain": [0, 100], "breaks": [5, 10, 25, 50]})["land"]
    lut = ramp.lut()
    assert lut.n == 5 and lut.stepped
    np.testing.assert_allclose(lut.edges, [0, 5, 10, 25, 50, 100])
    v = np.array([0, 4.999, 5, 9, 10, 24, 25, 49.9, 50, 100, 100.5, -1, np.nan])
    assert lut.index(v).tolist() == [0, 0, 1, 1, 2, 2, 3, 3, 4, 4, 6, 5, 7]
    np.testing.assert_allclose(lut.values, [2.5, 7.5, 17.5, 37.5, 75])
    # class colours evenly spaced along the ramp (STEPPED_COLOR_RULE): positions (i + 0.5) / 5
    expected = np.rint(ramp.colors_at((np.arange(5) + 0.5) / 5, fraction=True) * 255)
    np.testing.assert_array_equal(lut.rgb8[:5], expected)


def test_equal_steps_use_the_arithmetic_path_and_agree_with_searchsorted():
    lut = make(land={**SEQ, "steps": 7})["land"].lut()
    assert lut.n == 7 and lut.width == pytest.approx(12 / 7)
    v = np.random.default_rng(2).uniform(0, 12, 10000)
    np.testing.assert_array_equal(lut.index(v), np.clip(np.searchsorted(lut.edges, v, "right") - 1, 0, 6))
    # class colours of equal steps sit at the class midpoints
    ramp = make(land={**SEQ, "steps": 7})["land"]
    mids = (lut.edges[:-1] + lut.edges[1:]) / 2
    np.testing.assert_array_equal(lut.rgb8[:7], np.rint(ramp.colors_at(mids) * 255))


def test_quantile_breaks():
    ramp = make(land={**SEQ, "steps": 4, "step_method": "quantile"})["land"]
    base = ramp.lut()
    assert base.quantile_pending and base.n == 4
    data = np.random.default_rng(4).exponential(2.0, 20000)
    data[:100] = np.nan
    lut = base.with_quantile_breaks(data)
    assert not lut.quantile_pending and lut.step_method == "quantile"
    inside = data[np.isfinite(data) & (data <= 12)]
    np.testing.assert_allclose(lut.edges[1:-1], np.quantile(inside, [0.25, 0.5, 0.75]))
    counts = np.bincount(lut.index(inside), minlength=lut.n + 3)[:4]
    assert np.all(np.abs(counts - inside.size / 4) <= 2)


def test_quantile_breaks_merge_ties_and_need_data():
    edges = quantile_breaks(np.r_[np.zeros(900), np.linspace(0, 10, 100)], 5, (0, 10))
    assert edges[0] == 0 and edges[-1] == 10 and np.all(np.diff(edges) > 0) and len(edges) < 6
    with pytest.raises(ComposeError, match="no finite data inside the domain"):
        quantile_breaks(np.array([np.nan, 50.0]), 4, (0, 12), "land")
    with pytest.raises(ComposeError, match="quantile breaks need a stepped"):
        make(land=SEQ)["land"].lut().with_quantile_breaks(np.arange(10), steps=None)


def test_qualitative_index():
    table = {"kind": "qualitative", "classes": [
        {"value": 8, "label": "rock", "color": "#e0e0e0"},
        {"value": 1, "label": "forest", "color": "#2a5a3e"},
        {"value": 4, "label": "crop", "color": "#f0e070"}]}
    ramp = make(cover=table)["cover"]
    lut = ramp.lut()
    assert lut.n == 3 and lut.values.tolist() == [8, 1, 4]
    idx = lut.index(np.array([[1, 4, 8], [2, np.nan, 0]]))
    assert idx.tolist() == [[1, 2, 0], [5, 5, 5]]
    assert lut.rgb8[1].tolist() == [0x2a, 0x5a, 0x3e]
    assert lut.rgb8[lut.outside_low_index].tolist() == lut.rgb8[lut.nodata_index].tolist()


def test_rgba8_table_packs_for_np_take():
    lut = make(land=SEQ)["land"].lut(samples=64)
    table = lut.rgba8_table()
    assert table.dtype == np.dtype("<u4") and table.shape == (lut.n + 3,)
    idx = lut.index(np.array([[0.0, 6.0], [np.nan, 13.0]]))
    rgba = np.take(table, idx).view(np.uint8).reshape(2, 2, 4)
    np.testing.assert_array_equal(rgba[..., :3], lut.rgb8[idx])
    assert rgba[..., 3].tolist() == [[255, 255], [255, 255]]
    clear = lut.rgba8_table(nodata_alpha=0)
    assert np.take(clear, idx).view(np.uint8).reshape(2, 2, 4)[1, 0, 3] == 0


def test_largest_table_fits_uint16():
    ramp = make(land={**SEQ, "samples": 65533})["land"]
    lut = ramp.lut()
    assert lut.nodata_index == 65535 and lut.index(np.array([np.nan]))[0] == 65535
    with pytest.raises(ComposeError, match="samples must be 2 to 65533"):
        ramp.lut(samples=70000)
