"""A large no-data area recedes (issue 10, rule nodata-quiet; common practice, no source): its L*
contrast with the paper must not exceed the data's median, as drawn on the map."""
from __future__ import annotations

import numpy as np

from compose.color.lab import srgb_to_lch
from compose.color.parse import parse_color
from compose.color.wcag import contrast_ratio
from tests.check._maps import apply_change, base_map, check, field, relief, style

PAPER = "#ffffff"


def one(report, rule, layer="val"):
    got = report.rule(rule, layer)
    assert len(got) == 1, [r.to_json() for r in report.rules]
    return got[0]


def half_missing(data, nodata):
    # the east half of the canvas is no-data (50 % of the map)
    return style([relief(data["flat"]), field(data["west"], nodata=nodata)],
                 map_=base_map(background=PAPER))


def test_a_dark_gray_sea_is_neutral_but_loud_and_the_fix_is_a_light_neutral(data, tmp_path):
    doc = half_missing(data, "#5a5a5a")
    rep = check(tmp_path, doc)
    assert one(rep, "nodata-chroma").passed and one(rep, "nodata-separation").passed
    bad = one(rep, "nodata-quiet")
    assert not bad.passed and bad.value > bad.limit and "covers 50% of the map" in bad.message
    new = bad.change.values["nodata"]
    L, C, _ = srgb_to_lch(np.asarray(parse_color(new)))
    assert L > 75 and C <= 3                          # a light neutral near the paper
    fixed = check(tmp_path, apply_change(doc, bad.change), "fixed")
    for rule in ("nodata-quiet", "nodata-chroma", "nodata-separation", "nodata-background"):
        assert one(fixed, rule).passed, one(fixed, rule).message
    # quieter than before by the same measure WCAG uses for contrast with the paper
    white = np.ones(3)
    before = float(contrast_ratio(np.asarray(parse_color("#5a5a5a")), white))
    after = float(contrast_ratio(np.asarray(parse_color(new)), white))
    assert after < before / 2


def test_a_light_gray_no_data_area_passes(data, tmp_path):
    r = one(check(tmp_path, half_missing(data, "#d4d4d4")), "nodata-quiet")
    assert r.passed and r.value <= r.limit


def test_a_small_gap_is_not_judged(data, tmp_path):
    # gradient.tif has a 6 x 6 corner of no-data (< 1 % of the map)
    rep = check(tmp_path, style([relief(data["flat"]), field(data["gradient"], nodata="#404040")],
                                map_=base_map(background=PAPER)))
    r = one(rep, "nodata-quiet")
    assert r.passed and r.value is None and "not judged" in r.message


def test_the_other_nodata_fixes_propose_the_quiet_color_on_a_large_area(data, tmp_path):
    doc = half_missing(data, "#437a3a")                # a green from the ramp's range
    rep = check(tmp_path, doc, "green")
    chroma = one(rep, "nodata-chroma")
    assert not chroma.passed
    assert chroma.change.values == one(rep, "nodata-quiet").change.values
    fixed = check(tmp_path, apply_change(doc, chroma.change), "green-fixed")
    assert all(one(fixed, r).passed for r in ("nodata-quiet", "nodata-chroma",
                                              "nodata-separation", "nodata-background"))


def test_a_muted_ramp_leaves_no_light_neutral_and_the_fix_is_the_paper_not_a_mid_gray(data,
                                                                                        tmp_path):
    # a muted ramp from a pale cream (L* 85, C* 10) down to a dark slate: every neutral from
    # L* 35 to about 90 lies within 10 dE00 (Brychtova & Coltekin 2016) of one of its colours,
    # so the nearest "quiet" neutral was a mid grey mass (L* ~60); the paper itself keeps clear
    muted = {"kind": "sequential", "domain": [0, 10],
             "through": [{"L": 85, "C": 10.3, "h": 95}, {"L": 72.5, "C": 15.5, "h": 140},
                         {"L": 60, "C": 18.9, "h": 60}, {"L": 47.5, "C": 15.5, "h": 20},
                         {"L": 35, "C": 12, "h": 300}]}
    doc = style([relief(data["flat"]), field(data["west"], nodata="#437a3a", ramp="muted")],
                {"muted": muted}, map_=base_map(background=PAPER))
    bad = one(check(tmp_path, doc, "muted"), "nodata-quiet")
    assert not bad.passed
    assert bad.change.values["nodata"] == PAPER, bad.fix
    fixed = check(tmp_path, apply_change(doc, bad.change), "muted-fixed")
    for rule in ("nodata-quiet", "nodata-chroma", "nodata-separation", "nodata-background"):
        assert one(fixed, rule).passed, one(fixed, rule).message
    # the paper's own colour, by CIEDE2000 as colour-science computes it (CIE 15:2004)
    import colour
    lab = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(np.asarray(parse_color(bad.change.values["nodata"]))))
    assert colour.delta_E(lab, colour.XYZ_to_Lab(colour.sRGB_to_XYZ(np.ones(3))),
                          method="CIE 2000") < 0.5


def test_the_share_of_the_map_counts_the_gray_orders_samples():
    # the no-data share is its sampled count over the canvas's samples: every 2nd row and
    # column, every 4th on canvases of 16 Mpixel and more (compose.check.stats.gray_stride);
    # our own arithmetic, no source
    from types import SimpleNamespace

    from compose.check.nodata_quiet import _sampled_canvas
    from compose.check.stats import Statistics

    def ctx(w, h):
        return SimpleNamespace(stats=Statistics(width=w, height=h, layers=[],
                                                background=(1.0, 1.0, 1.0)))

    assert _sampled_canvas(ctx(1501, 1000)) == 751 * 500
    assert _sampled_canvas(ctx(3999, 4000)) == 2000 * 2000          # 15,996,000 pixels
    assert _sampled_canvas(ctx(4000, 4000)) == 1000 * 1000          # 16,000,000 pixels
    assert _sampled_canvas(ctx(8193, 8192)) == 2049 * 2048
