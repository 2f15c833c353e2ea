"""Ramp rules: twins, threshold breaks, no-data colours (Brychtova & Coltekin 2016: dE00 10),
classes in normal vision and under deutan / protan simulation (Machado et al. 2009, severity 100),
grayscale order of the composite, ramp shape (compose.ramps metrics)."""
from __future__ import annotations

import dataclasses

import numpy as np

from compose.check import CheckContext, check_style
from compose.check.ramp_rules import twin_chroma, twin_lightness
from compose.engine import prepare, run
from compose.style import load_style
from tests.check._maps import LAND, apply_change, check, field, relief, style, write_style

SEA = {"twin": "land", "hue": [215, 240]}


def one(report, rule, layer=None):
    got = report.rule(rule, layer)
    assert len(got) == 1, [r.to_json() for r in report.rules]
    return got[0]


def classes_layer(src, ramp="cover", **kw):
    layer = {"name": "cover", "role": "theme", "kind": "classes", "source": str(src), "ramp": ramp}
    layer.update(kw)
    return layer


def cover(colors, families=None):
    families = families or [None] * len(colors)
    classes = []
    for i, (c, f) in enumerate(zip(colors, families), start=1):
        item = {"value": i, "label": f"class {i}", "color": c}
        if f:
            item["family"] = f
        classes.append(item)
    return {"kind": "qualitative", "classes": classes}


DISTINCT = [{"L": 40, "C": 30, "h": 140}, {"L": 85, "C": 50, "h": 90}, {"L": 60, "C": 45, "h": 260},
            {"L": 70, "C": 40, "h": 40}]


# --- twins ------------------------------------------------------------------------------------

def test_twin_passes_and_a_close_hue_fails_with_a_fix(data, tmp_path):
    doc = style([relief(data["hills"]), field(data["gradient"], ramp="sea")],
                {"land": LAND, "sea": SEA})
    rep = check(tmp_path, doc)
    for rule in ("twin-lightness", "twin-chroma", "twin-hue"):
        r = one(rep, rule, "val")
        assert r.passed and r.ramp == "sea"
    doc["ramp"]["sea"]["hue"] = [110, 130]
    bad = one(check(tmp_path, doc, "close"), "twin-hue", "val")
    assert not bad.passed and bad.value < 30
    fixed = check(tmp_path, apply_change(doc, bad.change), "fixed")
    assert one(fixed, "twin-hue", "val").passed


def _twin_context(data, tmp_path, shift_L=0.0, shift_C=0.0):
    doc = style([relief(data["hills"]), field(data["gradient"], ramp="sea")],
                {"land": LAND, "sea": SEA})
    st = load_style(write_style(tmp_path, doc))
    run_ = prepare(st)
    try:
        stats = run(run_, [])
    finally:
        run_.close()
    ramps = dict(run_.ramps)
    sea = ramps["sea"]
    (piece,) = sea.pieces
    lab = piece.lab.copy()
    lab[:, 0] += shift_L
    lab[:, 1:] *= 1.0 + shift_C
    ramps["sea"] = dataclasses.replace(sea, pieces=(dataclasses.replace(piece, lab=lab),))
    return CheckContext.build(st, stats, ramps)


def test_twin_lightness_and_chroma_fail_when_the_twin_drifts(data, tmp_path):
    # the builder keeps twins matched, so drift is made by editing the built ramp's colours
    assert twin_lightness(_twin_context(data, tmp_path))[0].passed
    assert not twin_lightness(_twin_context(data, tmp_path, shift_L=3.0))[0].passed
    assert twin_chroma(_twin_context(data, tmp_path))[0].passed
    assert not twin_chroma(_twin_context(data, tmp_path, shift_C=0.3))[0].passed


# --- threshold --------------------------------------------------------------------------------

def _warm(above_L):
    return {"kind": "threshold", "domain": [0, 10], "at": 6,
            "below": [{"L": 90, "C": 20, "h": 95}, {"L": 60, "C": 40, "h": 120}],
            "above": [{"L": above_L, "C": 45, "h": 30}, {"L": 40, "C": 45, "h": 20}]}


def test_threshold_lightness_across_the_break(data, tmp_path):
    doc = style([relief(data["hills"]), field(data["gradient"], ramp="warm")], {"warm": _warm(60)})
    rep = check(tmp_path, doc)
    assert one(rep, "threshold-lightness", "val").passed
    assert one(rep, "ramp-break-visible", "val").passed
    doc = style([relief(data["hills"]), field(data["gradient"], ramp="warm")], {"warm": _warm(50)})
    bad = one(check(tmp_path, doc, "step"), "threshold-lightness", "val")
    assert not bad.passed and bad.value > 1
    assert one(check(tmp_path, apply_change(doc, bad.change), "fixed"), "threshold-lightness").passed


def test_break_that_does_not_show_fails(data, tmp_path):
    warm = _warm(60)
    warm["above"][0]["h"] = 118
    warm["above"][1]["h"] = 118
    doc = style([relief(data["hills"]), field(data["gradient"], ramp="warm")], {"warm": warm})
    assert not one(check(tmp_path, doc), "ramp-break-visible", "val").passed


# --- no-data ----------------------------------------------------------------------------------

def test_nodata_rules_pass_with_a_quiet_gray(data, tmp_path):
    doc = style([relief(data["hills"]), field(data["gradient"], nodata="#c6c6c6")])
    rep = check(tmp_path, doc)
    for rule in ("nodata-chroma", "nodata-separation", "nodata-background"):
        assert one(rep, rule, "val").passed, rule


def test_transparent_nodata_is_not_judged(data, tmp_path):
    rep = check(tmp_path, style([relief(data["hills"]), field(data["gradient"],
                                                             nodata="transparent")]))
    assert rep.rule("nodata-chroma") == [] and rep.rule("nodata-separation") == []


def test_colored_nodata_fails_chroma_and_the_fix_passes(data, tmp_path):
    doc = style([relief(data["hills"]), field(data["gradient"], nodata={"L": 80, "C": 20, "h": 30})])
    bad = one(check(tmp_path, doc), "nodata-chroma", "val")
    assert not bad.passed and bad.value > 3 and bad.change.table == 'layer "val"'
    rep = check(tmp_path, apply_change(doc, bad.change), "fixed")
    for rule in ("nodata-chroma", "nodata-separation", "nodata-background"):
        assert one(rep, rule, "val").passed, rule


def test_nodata_close_to_the_ramp_fails_separation(data, tmp_path):
    doc = style([relief(data["hills"]), field(data["gradient"], nodata={"L": 61, "C": 44, "h": 131})])
    bad = one(check(tmp_path, doc), "nodata-separation", "val")
    assert not bad.passed and bad.value < 10
    assert one(check(tmp_path, apply_change(doc, bad.change), "fixed"), "nodata-separation").passed


def test_nodata_equal_to_background_passes_a_near_miss_fails(data, tmp_path):
    same = check(tmp_path, style([relief(data["hills"]), field(data["gradient"], nodata="#ffffff")]))
    r = one(same, "nodata-background", "val")
    assert r.passed and "same as the background" in r.message
    near = check(tmp_path, style([relief(data["hills"]), field(data["gradient"], nodata="#eeeeee")]),
                 "near")
    assert not one(near, "nodata-background", "val").passed


# --- classes ----------------------------------------------------------------------------------

def test_class_count_outside_is_a_warning_only(data, tmp_path):
    doc = style([relief(data["hills"]), classes_layer(data["classes"])], {"cover": cover(DISTINCT)})
    rep = check(tmp_path, doc)
    r = one(rep, "classes-count", "cover")
    assert r.severity == "warning" and r.passed and not r.met and r.verdict == "warn"
    assert r in rep.warnings and r not in rep.failures


def test_distinct_classes_pass_every_vision(data, tmp_path):
    doc = style([relief(data["hills"]), classes_layer(data["classes"])], {"cover": cover(DISTINCT)})
    rep = check(tmp_path, doc)
    for rule in ("classes-separation", "classes-separation-deutan", "classes-separation-protan"):
        assert one(rep, rule, "cover").passed, rule


def test_red_green_pair_fails_under_deutan_and_the_fix_clears_all(data, tmp_path):
    colors = [{"L": 55, "C": 45, "h": 35}, {"L": 55, "C": 45, "h": 135},
              {"L": 85, "C": 50, "h": 90}, {"L": 35, "C": 35, "h": 270}]
    doc = style([relief(data["hills"]), classes_layer(data["classes"])], {"cover": cover(colors)})
    rep = check(tmp_path, doc)
    assert one(rep, "classes-separation", "cover").passed
    bad = one(rep, "classes-separation-deutan", "cover")
    assert not bad.passed and bad.value < 10
    fixed = check(tmp_path, apply_change(doc, bad.change), "fixed")
    for rule in ("classes-separation", "classes-separation-deutan", "classes-separation-protan"):
        assert one(fixed, rule, "cover").passed, rule


def test_family_members_may_sit_at_half_the_separation(data, tmp_path):
    colors = [{"L": 45, "C": 30, "h": 140}, {"L": 51, "C": 30, "h": 140},
              {"L": 85, "C": 50, "h": 90}, {"L": 60, "C": 45, "h": 260}]
    plain = style([relief(data["hills"]), classes_layer(data["classes"])], {"cover": cover(colors)})
    r = one(check(tmp_path, plain), "classes-separation", "cover")
    assert not r.passed and 5 <= r.value < 10
    family = style([relief(data["hills"]), classes_layer(data["classes"])],
                   {"cover": cover(colors, ["forest", "forest", None, None])})
    r = one(check(tmp_path, family, "family"), "classes-separation", "cover")
    assert r.passed and r.limit == 5 and "same family" in r.message


# --- grayscale order --------------------------------------------------------------------------

def test_grayscale_order_holds_on_flat_ground_and_breaks_on_strong_relief(data, tmp_path):
    doc = style([relief(data["flat"]), field(data["gradient"], blend="multiply")])
    r = one(check(tmp_path, doc), "grayscale-order", "val")
    assert r.passed and r.value > 0.95
    short = {"kind": "sequential", "domain": [0, 10],
             "through": [{"L": 70, "C": 35, "h": 100}, {"L": 64, "C": 40, "h": 130}]}
    doc = style([relief(data["hills"], strength=1.0), field(data["gradient"], ramp="short",
                                                           blend="multiply")], {"short": short})
    bad = one(check(tmp_path, doc, "short"), "grayscale-order", "val")
    assert not bad.passed and "widen the L* range" in bad.fix


# --- ramp shape -------------------------------------------------------------------------------

def test_ramp_shape_rules(data, tmp_path):
    rep = check(tmp_path, style([relief(data["hills"]), field(data["gradient"])]))
    assert one(rep, "ramp-lightness-monotone", "val").passed
    assert one(rep, "ramp-step-uniformity", "val").passed
    wavy = {"kind": "sequential", "domain": [0, 10],
            "through": [{"L": 85, "C": 30, "h": 95}, {"L": 45, "C": 40, "h": 130},
                        {"L": 70, "C": 40, "h": 150}]}
    rep = check(tmp_path, style([relief(data["hills"]), field(data["gradient"], ramp="wavy")],
                                {"wavy": wavy}), "wavy")
    assert not one(rep, "ramp-lightness-monotone", "val").passed


def test_diverging_symmetry_and_midpoint(data, tmp_path):
    def div(mid_c, high_L):
        return {"kind": "diverging", "domain": [0, 10], "center": 5,
                "through": [{"L": 40, "C": 28, "h": 250}, {"L": 95, "C": mid_c, "h": 90},
                            {"L": high_L, "C": 28, "h": 30}]}
    rep = check(tmp_path, style([relief(data["flat"]), field(data["gradient"], ramp="d")],
                                {"d": div(0, 40)}))
    assert one(rep, "ramp-diverging-symmetry", "val").passed
    r = one(rep, "ramp-neutral-midpoint", "val")
    assert r.passed and r.met
    rep = check(tmp_path, style([relief(data["flat"]), field(data["gradient"], ramp="d")],
                                {"d": div(15, 60)}), "lopsided")
    assert not one(rep, "ramp-diverging-symmetry", "val").passed
    r = one(rep, "ramp-neutral-midpoint", "val")
    assert r.severity == "warning" and r.passed and not r.met


def test_check_style_runs_on_an_empty_ramp_set(data, tmp_path):
    st = load_style(write_style(tmp_path, style([relief(data["hills"])], {})))
    run_ = prepare(st)
    try:
        stats = run(run_, [])
        rep = check_style(st, stats, run_.ramps)
    finally:
        run_.close()
    assert rep.passed and np.isclose(rep.layers[0].coverage, 1.0)


def test_class_separation_is_judged_on_the_map_not_the_palette(data, tmp_path):
    # issue 10: a faint class layer (opacity 0.15 over the relief) has a well separated palette,
    # but the blended colours the reader sees are close: judged on the composite it fails
    ramps = {"cover": cover(DISTINCT)}
    faint = style([relief(data["hills"]), classes_layer(data["classes"], opacity=0.15)],
                  ramps=ramps)
    r = one(check(tmp_path, faint), "classes-separation", "cover")
    assert not r.passed and r.value < 10 and "as drawn on the map" in r.message
    solid = style([relief(data["hills"]), classes_layer(data["classes"])], ramps=ramps)
    r2 = one(check(tmp_path, solid, "solid"), "classes-separation", "cover")
    assert r2.passed and r2.value > r.value
