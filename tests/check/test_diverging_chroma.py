"""Diverging symmetry in chroma, judged on the map (issue 10, rule diverging-chroma-map): the two
arms of a diverging theme at equal distance from the centre must show equal chroma as drawn.
Limit budget.ramp.map_arm_chroma 3 C*ab (our design target, no source). Chroma on the rendered
pixels is recomputed with colour-science (sRGB IEC 61966-2-1 -> XYZ -> CIELAB, CIE 15:2004)."""
from __future__ import annotations

import colour
import numpy as np
import rasterio

from compose.check.diverging_chroma import matched_stops
from tests.check._maps import apply_change, check, field, relief, style, write_style
from tests.check.test_ramp_rules import one

NEUTRAL = {"L": 95, "C": 0, "h": 0}
WARM = {"L": 92, "C": 8, "h": 75}          # a cream ground, a little warmer than the default
# blue and brown arms of equal L* and C* at equal distance from 5 (the arms' stops mirror)
DIV = {"kind": "diverging", "domain": [0, 10], "center": 5,
       "through": [{"L": 35, "C": 28, "h": 255}, {"L": 65, "C": 26, "h": 245},
                   {"L": 96, "C": 1, "h": 90}, {"L": 65, "C": 26, "h": 70},
                   {"L": 35, "C": 28, "h": 50}]}
LOPSIDED = {**DIV, "through": [{"L": 35, "C": 18, "h": 255}, {"L": 65, "C": 14, "h": 245},
                               {"L": 96, "C": 1, "h": 90}, {"L": 65, "C": 34, "h": 70},
                               {"L": 35, "C": 36, "h": 50}]}


def diverging(data, ramp=DIV, tint=NEUTRAL, dem="hills", **theme):
    return style([relief(data[dem], tint=tint),
                  field(data["scatter"], ramp="div", blend=theme.pop("blend", "multiply"),
                        nodata="transparent", **theme)], {"div": ramp})


def _pixel_truth(tmp_path, doc, src) -> float:
    """p90 over 32 distances of |dC*ab| between the arms, from the rendered PNG's pixels on
    flat ground, grouped by each pixel's data value (the same 32 bands of each arm's reach)."""
    from matplotlib.image import imread

    from compose.render import render_style
    from compose.style import load_style
    tmp_path.mkdir(parents=True, exist_ok=True)
    result = render_style(load_style(write_style(tmp_path, doc, "truth")), tmp_path / "out",
                          legend=False)
    rgb = imread(result.outputs["png"])[..., :3].astype(float)
    with rasterio.open(src) as ds:
        v = ds.read(1)
    C = colour.Lab_to_LCHab(colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb)))[..., 1]
    band = np.minimum((np.abs(v - 5.0) / 5.0 * 32).astype(int), 31)
    low = np.array([C[(v < 5) & (band == k)].mean() for k in range(32)])
    high = np.array([C[(v > 5) & (band == k)].mean() for k in range(32)])
    ok = np.isfinite(low) & np.isfinite(high)
    return float(np.percentile(np.abs(low - high)[ok], 90))


def test_matched_arms_pass_and_a_warm_ground_multiplied_under_them_fails(data, tmp_path):
    good = one(check(tmp_path, diverging(data), "neutral"), "diverging-chroma-map")
    assert good.passed and good.value < 2.0, good.message
    doc = diverging(data, tint=WARM)
    rep = check(tmp_path, doc, "warm")
    assert one(rep, "diverging-symmetry-map").passed           # lightness cannot see it
    bad = one(rep, "diverging-chroma-map")
    assert not bad.passed and "drawn on the map" in bad.message
    assert bad.change is not None and bad.change.table == 'layer "val"', bad.fix
    assert bad.change.values == {"blend": "normal", "opacity": 0.85}
    assert "neutral" in bad.fix                                # the next step, named
    # the steps applied one after another, as compose fix's rounds would: the ground is made
    # neutral next (not the theme opaque, which would hide the relief)
    doc = apply_change(doc, bad.change)
    again = one(check(tmp_path, doc, "warm-1"), "diverging-chroma-map")
    if not again.passed:
        assert again.change.table == 'layer "relief"' and set(again.change.values) == {"tint"}
        doc = apply_change(doc, again.change)
    fixed = check(tmp_path, doc, "warm-2")
    for rule in ("diverging-chroma-map", "diverging-symmetry-map", "relief-visible"):
        assert one(fixed, rule).passed, one(fixed, rule).message


def test_the_rule_reads_what_the_pixels_show(data, tmp_path):
    # flat ground: no shading for the lit-end estimate to correct
    for tint in (WARM, NEUTRAL):
        doc = diverging(data, tint=tint, dem="flat")
        rule = one(check(tmp_path, doc, "flat"), "diverging-chroma-map").value
        truth = _pixel_truth(tmp_path / str(tint["C"]), doc, data["scatter"])
        assert abs(rule - truth) <= 0.6, (tint, rule, truth)
    assert rule < 2.0                                           # neutral: the arms match


def test_a_lopsided_palette_fails_and_its_stops_are_matched(data, tmp_path):
    doc = diverging(data, ramp=LOPSIDED)
    bad = one(check(tmp_path, doc, "lopsided"), "diverging-chroma-map")
    assert not bad.passed and "before any layer is blended" in bad.fix
    assert bad.change.table == 'ramp "div"'
    new = bad.change.values["through"]
    assert [t["C"] for t in new] == [18.0, 14.0, 1.0, 14.0, 18.0]          # the lower of each pair
    assert [t["L"] for t in new] == [35.0, 65.0, 96.0, 65.0, 35.0]
    assert [t["h"] for t in new] == [255.0, 245.0, 90.0, 70.0, 50.0]
    fixed = check(tmp_path, apply_change(doc, bad.change), "lopsided-fixed")
    assert one(fixed, "diverging-chroma-map").passed
    assert matched_stops([(t["L"], t["C"], t["h"]) for t in new]) is None


def test_budget_key_and_json(data, tmp_path):
    doc = diverging(data)
    doc["budget"] = {"ramp": {"map_arm_chroma": 0.0}}
    r = one(check(tmp_path, doc, "strict"), "diverging-chroma-map")
    js = r.to_json()
    assert js["budget"] == "budget.ramp.map_arm_chroma" and js["origin"] == "style"
    assert js["unit"] == "C*ab" and js["comparison"] == "<=" and not r.passed
