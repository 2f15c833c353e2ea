"""Overlay legibility: WCAG 2 contrast shares (WCAG 2.1 SC 1.4.11 non-text 3:1, SC 1.4.3 text
4.5:1; thresholds not rounded) and the size-aware variant (Stone, Szafir & Setlur 2014, parameters
from two public implementations, not checked against the paper's table)."""
from __future__ import annotations

import math

import numpy as np
import pytest

from compose.check.legibility import noticeable_difference, visual_angle
from compose.check.stats import N_CONTRAST, contrast_bins, contrast_share
from tests.check._maps import apply_change, check, labels, lines, relief, style

WHITE_HALO = {"color": "#ffffff", "width": 3.0}


def one(report, rule, layer):
    got = report.rule(rule, layer)
    assert len(got) == 1, [r.to_json() for r in report.rules]
    return got[0]


def test_threshold_is_not_rounded():
    # WCAG understanding docs: 2.999:1 does not meet 3:1
    hist = np.bincount(contrast_bins(np.array([2.999, 3.0])), minlength=N_CONTRAST).astype(float)
    assert contrast_share(hist, 3.0) == 0.5
    assert contrast_share(hist, 2.99) == 1.0
    assert math.isnan(contrast_share(np.zeros(N_CONTRAST), 3.0))


def test_dark_coast_passes_light_coast_fails_and_the_fix_passes(data, tmp_path):
    ok = check(tmp_path, style([relief(data["hills"]), lines(data["coast"], stroke="#303030",
                                                           width=1.5)]))
    r = one(ok, "overlay-contrast", "coast")
    assert r.passed and r.value >= 0.95 and "against what lies beneath" in r.message
    doc = style([relief(data["hills"]), lines(data["coast"], stroke="#c8c8c8", width=1.5)])
    bad = one(check(tmp_path, doc, "bad"), "overlay-contrast", "coast")
    assert not bad.passed and bad.value < 0.95
    assert "darken the coast stroke to L* <=" in bad.fix and "add a halo" in bad.fix
    assert bad.change.values.keys() == {"stroke"}
    fixed = one(check(tmp_path, apply_change(doc, bad.change), "fixed"), "overlay-contrast", "coast")
    assert fixed.passed


def test_stroke_is_judged_against_its_halo(data, tmp_path):
    doc = style([relief(data["hills"]), lines(data["coast"], stroke="#303030", width=1.0,
                                            halo=WHITE_HALO)])
    r = one(check(tmp_path, doc), "overlay-contrast", "coast")
    assert r.passed and "against the halo" in r.message and "(information)" in r.message
    doc = style([relief(data["hills"]), lines(data["coast"], stroke="#d8d8d8", width=1.0,
                                            halo=WHITE_HALO)])
    bad = one(check(tmp_path, doc, "pale"), "overlay-contrast", "coast")
    assert not bad.passed
    fixed = one(check(tmp_path, apply_change(doc, bad.change), "fixed"), "overlay-contrast", "coast")
    assert fixed.passed


def test_dark_casing_passes_as_one_wider_mark(data, tmp_path):
    doc = style([relief(data["hills"]), lines(data["coast"], stroke="#303030", width=1.0,
                                            halo={"color": "#202020", "width": 3.0})])
    r = one(check(tmp_path, doc), "overlay-contrast", "coast")
    assert r.passed and "passes as a casing" in r.message


def test_halo_is_the_fix_when_no_lightness_works(data, tmp_path):
    # ground: L* 30 on the left, 70 on the right: no grey reaches 3:1 against both halves
    gray = {"kind": "sequential", "domain": [0, 10],
            "through": [{"L": 30, "C": 0, "h": 0}, {"L": 70, "C": 0, "h": 0}]}
    ground = {"name": "land", "role": "ground", "kind": "field", "source": str(data["halves"]),
              "ramp": "gray"}
    doc = style([ground, lines(data["coast"], stroke="#909090", width=1.0)], {"gray": gray})
    bad = one(check(tmp_path, doc), "overlay-contrast", "coast")
    assert not bad.passed and bad.value < 0.1
    assert "halo" in bad.change.values
    fixed = one(check(tmp_path, apply_change(doc, bad.change), "fixed"), "overlay-contrast", "coast")
    assert fixed.passed and "against the halo" in fixed.message


def test_labels_need_4_5_against_their_halo(data, tmp_path):
    ok = check(tmp_path, style([relief(data["hills"]),
                                labels(data["towns"], color="#303030", halo=WHITE_HALO)]))
    r = one(ok, "label-contrast", "towns")
    assert r.passed and "4.5:1" in r.message and "SC 1.4.3" in r.message
    doc = style([relief(data["hills"]), labels(data["towns"], color="#909090", halo=WHITE_HALO)])
    bad = one(check(tmp_path, doc, "gray"), "label-contrast", "towns")
    assert not bad.passed       # #909090 on white is 3.2:1 -- enough for lines, not for text
    fixed = one(check(tmp_path, apply_change(doc, bad.change), "fixed"), "label-contrast", "towns")
    assert fixed.passed


def test_labels_get_no_casing_exception(data, tmp_path):
    doc = style([relief(data["hills"]),
                 labels(data["towns"], color="#303030", halo={"color": "#202020", "width": 3.0})])
    r = one(check(tmp_path, doc), "label-contrast", "towns")
    assert not r.passed and "casing" not in r.message


def test_stone_szafir_setlur_thresholds():
    # references.md section 7 (CALC from C + K / s): 0.10 deg -> 12.59 / 20.75 / 34.06
    np.testing.assert_allclose(noticeable_difference(0.10), [12.59, 20.75, 34.06], atol=0.01)
    np.testing.assert_allclose(noticeable_difference(1.00), [5.83, 6.88, 8.22], atol=0.01)
    # visual angle 2 atan(w / 2d): references.md, 0.1 deg at 600 mm is 1.05 mm (rounded)
    w_mm = 2 * 600 * math.tan(math.radians(0.05))
    assert w_mm == pytest.approx(1.05, abs=0.005)
    assert visual_angle(w_mm * 72 / 25.4, 600) == pytest.approx(0.1, abs=1e-9)


def test_size_aware_rule_only_when_asked(data, tmp_path):
    doc = style([relief(data["hills"]), lines(data["coast"], stroke="#909090", width=1.0)])
    assert check(tmp_path, doc).rule("overlay-size") == []
    doc["budget"] = {"overlay": {"viewing_distance": 300}}
    thick = style([relief(data["hills"]), lines(data["coast"], stroke="#202020", width=4.0)],
                  budget={"overlay": {"viewing_distance": 300}})
    assert one(check(tmp_path, thick, "thick"), "overlay-size", "coast").passed


def test_thin_stroke_fails_far_away_and_widening_fixes_it(data, tmp_path):
    doc = style([relief(data["hills"]), lines(data["coast"], stroke="#909090", width=1.0)],
                budget={"overlay": {"viewing_distance": 2000}})
    bad = one(check(tmp_path, doc), "overlay-size", "coast")
    assert not bad.passed and "extrapolated" in bad.message
    assert bad.change.values.keys() == {"width"} and bad.change.values["width"] > 1.0
    fixed = one(check(tmp_path, apply_change(doc, bad.change), "fixed"), "overlay-size", "coast")
    assert fixed.passed
