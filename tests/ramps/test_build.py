"""Building each kind of ramp; every kind has a case that meets its rule and one that violates it.

The rules are checked twice: by our metrics (``rule_checks``) and independently, on the 8-bit
colours drawn, with colour-science (see conftest). Rules and limits: docs/style.md "Ramps";
the 10 dE00 separation is Brychtova & Coltekin (2016); C* <= 5 for a neutral midpoint and the
5 % step CV are our own design targets (common practice, no source).
"""
from __future__ import annotations

import numpy as np
import pytest

from compose.ramps import RampLimits, ramp_metrics, rule_checks

from .conftest import lch, make, ref_de00, ref_lab, ref_lch, ref_min_pairwise, ref_step_cv, ref_vision_lab, rgb8_of

GOOD_SEQ = {"kind": "sequential", "domain": [0, 12],
            "through": [lch(95, 12, 100), lch(70, 38, 125), lch(45, 32, 150), lch(25, 20, 165)]}
BUMPY = {"kind": "sequential", "domain": [0, 12],
         "through": [lch(85, 30, 95), lch(45, 45, 140), lch(75, 55, 60), lch(35, 45, 20)]}


def verdicts(ramp) -> dict[str, bool]:
    return {c.rule: c.passed for c in rule_checks(ramp_metrics(ramp))}


# --- sequential ---------------------------------------------------------------------------------

@pytest.mark.parametrize("space", ["cam02ucs", "cielab"])
def test_sequential_meets_its_rule(space):
    ramp = make(land={**GOOD_SEQ, "space": space})["land"]
    v = verdicts(ramp)
    assert v["ramp-lightness-monotone"] and v["ramp-step-uniformity"] and v["grayscale-order"]
    # colour-science: L* of 64 drawn 8-bit colours strictly decreasing (8-bit rounding moves L* by
    # < 0.2, the steps are ~1 L*)
    L = ref_lab(rgb8_of(ramp, np.linspace(0, 12, 64)))[:, 0]
    assert np.all(np.diff(L) < 0)
    # colour-science CAM02-UCS: equal data steps, equal perceived steps (unrounded colours at 1024)
    assert ref_step_cv(ramp.colors_at(np.linspace(0, 12, 1024))) <= 5.0
    # the stops' end colours are reached (within 8-bit rounding: 0.5 L*, 1 C*)
    ends = ref_lch(rgb8_of(ramp, [0, 12]))
    np.testing.assert_allclose(ends[:, :2], [[95, 12], [25, 20]], atol=1.0)


def test_sequential_non_monotone_lightness_builds_but_fails():
    ramp = make(bumpy=BUMPY)["bumpy"]
    m = ramp_metrics(ramp)
    assert not verdicts(ramp)["ramp-lightness-monotone"]
    L = ref_lab(rgb8_of(ramp, np.linspace(0, 12, 64)))[:, 0]
    rises = np.diff(L) > 0
    assert rises.any() and (~rises).any()
    # the largest reversal: the stops go 45 -> 75, so about 30 L* (rounding, sampling: 0.5)
    assert m.lightness_reversal == pytest.approx(30.0, abs=0.5)


def test_interpolation_goes_through_the_stops_and_is_gamut_mapped_by_chroma_only():
    # Three stops on the sRGB boundary: the smooth curve through them bulges out of sRGB between
    # them, and only chroma is taken off there.
    stops = [lch(90, 88, 100), lch(60, 85, 135), lch(35, 34, 160)]
    ramp = make(edge={"kind": "sequential", "domain": [0, 1], "through": stops})["edge"]
    m = ramp_metrics(ramp)
    assert m.gamut_removed_max > 3.0
    ends = ref_lch(rgb8_of(ramp, [0.0, 1.0]))
    np.testing.assert_allclose(ends, [[90, 88, 100], [35, 34, 160]], atol=1.0)
    rgb = ramp.colors_at(np.linspace(0, 1, 200))
    assert rgb.min() >= 0 and rgb.max() <= 1
    assert verdicts(ramp)["ramp-lightness-monotone"]


# --- diverging ----------------------------------------------------------------------------------

DIV = {"kind": "diverging", "domain": [-4, 4], "center": 0,
       "through": [lch(30, 28, 268), lch(62, 30, 250), lch(96, 1, 90), lch(62, 34, 68), lch(30, 30, 48)]}


def _symmetry(ramp, reach):
    c = ramp.center
    d = np.linspace(0, reach, 33)
    return np.max(np.abs(ref_lab(rgb8_of(ramp, c - d))[:, 0] - ref_lab(rgb8_of(ramp, c + d))[:, 0]))


def test_diverging_meets_its_rule():
    ramp = make(change=DIV)["change"]
    v = verdicts(ramp)
    assert v["ramp-diverging-symmetry"] and v["ramp-neutral-midpoint"] and v["ramp-lightness-monotone"]
    assert _symmetry(ramp, 4.0) <= 1.0
    mid = ref_lch(rgb8_of(ramp, [0.0]))[0]
    assert mid[1] <= 5.0 and mid[0] >= 90


def test_diverging_asymmetric_domain_truncates_the_shorter_arm():
    ramp = make(change={**DIV, "domain": [-1, 4], "center": 0})["change"]
    assert verdicts(ramp)["ramp-diverging-symmetry"]
    assert _symmetry(ramp, 1.0) <= 1.0
    # the low end (-1) is where the full ramp has 1/4 of its arm: much lighter than the high end
    L = ref_lab(rgb8_of(ramp, [-1.0, 1.0, 4.0]))[:, 0]
    assert abs(L[0] - L[1]) <= 1.0 and L[0] - L[2] > 30


def test_diverging_center_off_zero():
    ramp = make(change={**DIV, "domain": [10, 30], "center": 14})["change"]
    mid = ref_lch(rgb8_of(ramp, [14.0]))[0]
    assert mid[1] <= 5.0 and mid[0] == pytest.approx(96, abs=0.6)
    assert _symmetry(ramp, 4.0) <= 1.0


def test_diverging_violations_are_reported():
    lopsided = {**DIV, "through": [lch(30, 28, 268), lch(96, 1, 90), lch(55, 30, 48)]}
    tinted = {**DIV, "through": [lch(30, 28, 268), lch(90, 25, 95), lch(30, 30, 48)]}
    ramps = make(lopsided=lopsided, tinted=tinted)
    assert not verdicts(ramps["lopsided"])["ramp-diverging-symmetry"]
    assert _symmetry(ramps["lopsided"], 4.0) > 10
    v = verdicts(ramps["tinted"])
    assert not v["ramp-neutral-midpoint"] and v["ramp-diverging-symmetry"]
    assert ref_lch(rgb8_of(ramps["tinted"], [0.0]))[0, 1] > 20


# --- threshold ----------------------------------------------------------------------------------

WARM = {"kind": "threshold", "domain": [14, 30], "at": 26,
        "below": [lch(93, 10, 190), lch(62, 30, 240)], "above": [lch(62, 62, 58), lch(34, 52, 30)]}


def _across(ramp):
    """8-bit colours of the lookup-table entries either side of the break."""
    lut = ramp.lut()
    first = lut.split[1]
    return lut.rgb8[[first - 1, first]].astype(float)


def test_threshold_meets_its_rule():
    ramp = make(warm=WARM)["warm"]
    v = verdicts(ramp)
    assert v["threshold-lightness"] and v["ramp-break-visible"] and v["ramp-lightness-monotone"]
    pair = ref_lab(_across(ramp))
    assert abs(pair[0, 0] - pair[1, 0]) <= 1.0
    assert ref_de00(pair[0], pair[1]) >= 10
    h = ref_lch(_across(ramp))[:, 2]
    assert abs((h[1] - h[0] + 180) % 360 - 180) > 120     # blue below, orange above
    L = ref_lab(rgb8_of(ramp, np.linspace(14, 30, 64)))[:, 0]
    assert np.all(np.diff(L) < 0)


def test_threshold_violations_are_reported():
    jump = {**WARM, "above": [lch(45, 60, 50), lch(30, 50, 30)]}
    same = {**WARM, "above": [lch(62, 30, 240), lch(34, 25, 260)]}
    ramps = make(jump=jump, same=same)
    assert not verdicts(ramps["jump"])["threshold-lightness"]
    pair = ref_lab(_across(ramps["jump"]))
    assert abs(pair[0, 0] - pair[1, 0]) > 10
    assert not verdicts(ramps["same"])["ramp-break-visible"]
    assert ref_de00(*ref_lab(_across(ramps["same"]))) < 10


# --- qualitative --------------------------------------------------------------------------------

def _classes(colors):
    return {"kind": "qualitative",
            "classes": [{"value": i + 1, "label": f"c{i + 1}", "color": c} for i, c in enumerate(colors)]}


GOOD_QUAL = [lch(34, 26, 155), lch(46, 44, 122), lch(63, 40, 111), lch(91, 60, 100), lch(78, 26, 80),
             lch(65, 24, 207), lch(46, 16, 328), lch(93, 1, 70)]


def test_qualitative_meets_its_rule():
    ramp = make(cover=_classes(GOOD_QUAL))["cover"]
    v = verdicts(ramp)
    assert v["classes-separation"] and v["classes-separation-deutan"] and v["classes-separation-protan"]
    rgb8 = ramp.lut().rgb8[:8].astype(float)
    for vision in ("normal", "deutan", "protan"):
        assert ref_min_pairwise(ref_vision_lab(rgb8, vision)) >= 10


def test_qualitative_red_green_pair_fails_under_deutan_only():
    # a red and a green of equal lightness: far apart in normal vision, close for a deutan
    ramp = make(rg=_classes([lch(55, 60, 30), lch(55, 55, 135), lch(85, 40, 95), lch(30, 30, 280),
                             lch(70, 20, 220)]))["rg"]
    v = verdicts(ramp)
    assert v["classes-separation"] and not v["classes-separation-deutan"]
    rgb8 = ramp.lut().rgb8[:5].astype(float)
    assert ref_min_pairwise(ref_vision_lab(rgb8, "normal")) >= 10
    assert ref_min_pairwise(ref_vision_lab(rgb8, "deutan")) < 10


def test_qualitative_class_count_outside_five_to_nine_is_a_warning():
    ramp = make(few=_classes(GOOD_QUAL[:3]))["few"]
    checks = {c.rule: c for c in rule_checks(ramp_metrics(ramp))}
    assert not checks["classes-count"].passed and checks["classes-count"].level == "warning"
    assert "3 classes" in ramp_metrics(ramp).warnings[0]


# --- twins --------------------------------------------------------------------------------------

def test_twin_has_the_same_lightness_and_chroma_as_its_base():
    ramps = make(land=GOOD_SEQ, sea={"twin": "land", "hue": [185, 235]})
    land, sea = ramps["land"], ramps["sea"]
    v = verdicts(sea)
    assert v["twin-lightness"] and v["twin-chroma"] and v["ramp-step-uniformity"]
    t = np.linspace(0, 12, 64)
    a, b = ref_lch(rgb8_of(land, t)), ref_lch(rgb8_of(sea, t))
    assert np.max(np.abs(a[:, 0] - b[:, 0])) <= 1.0
    assert np.max(np.abs(a[:, 1] - b[:, 1])) <= 1.0
    h = b[:, 2][b[:, 1] > 3]
    assert h[0] == pytest.approx(185, abs=3) and h[-1] == pytest.approx(235, abs=3)
    assert sea.base is land and land.matched == ("land", "sea")


def test_twin_lowers_chroma_in_both_ramps_where_its_hue_cannot_reach():
    # A bright, saturated yellow-green base: blue hues cannot show C* 60 at L* 85, so both lose it.
    base = {"kind": "sequential", "domain": [0, 1], "through": [lch(92, 60, 105), lch(40, 40, 135)]}
    alone = make(land=base)["land"]
    ramps = make(land=base, sea={"twin": "land", "hue": [240, 260]})
    m_base, m_twin = ramp_metrics(ramps["land"]), ramp_metrics(ramps["sea"])
    assert m_twin.matched_removed_max > 20 and m_base.matched_removed_max == m_twin.matched_removed_max
    assert 0 < m_twin.matched_removed_mean < m_twin.matched_removed_max
    c_alone = ref_lch(rgb8_of(alone, [0.0]))[0, 1]
    c_base = ref_lch(rgb8_of(ramps["land"], [0.0]))[0, 1]
    c_twin = ref_lch(rgb8_of(ramps["sea"], [0.0]))[0, 1]
    assert c_alone > 55 and c_base < 30 and abs(c_base - c_twin) <= 1.0


def test_twin_of_a_twin_shares_the_root():
    ramps = make(land=GOOD_SEQ, sea={"twin": "land", "hue": [185, 235]},
                 lake={"twin": "sea", "hue": [250, 280], "domain": [0, 100]})
    lake, land = ramps["lake"], ramps["land"]
    assert lake.domain == (0.0, 100.0) and ramps["sea"].domain == (0.0, 12.0)
    a = ref_lch(rgb8_of(land, np.linspace(0, 12, 32)))
    b = ref_lch(rgb8_of(lake, np.linspace(0, 100, 32)))
    assert np.max(np.abs(a[:, :2] - b[:, :2])) <= 1.0


def test_twin_violations_are_reported():
    # a twin sweeping 300 degrees of hue while its base barely turns: the shared arc-length
    # spacing cannot be even for both -> step uniformity fails; a bumpy base fails monotonicity
    flat = {"kind": "sequential", "domain": [0, 1], "through": [lch(90, 20, 100), lch(40, 20, 110)]}
    ramps = make(flat=flat, spin={"twin": "flat", "hue": [0, 300]}, bumpy=BUMPY,
                 copy={"twin": "bumpy", "hue": [200, 240]})
    # measured at equal data steps (issue 10) the spin is uneven, more than its base, though
    # within the default 10 % limit: a 6 % budget catches it
    spin, flat_ = ramps["spin"], ramps["flat"]
    assert ramp_metrics(spin).step_cv > ramp_metrics(flat_).step_cv
    strict = {c.rule: c.passed for c in rule_checks(ramp_metrics(spin), RampLimits(step_cv=6.0))}
    assert not strict["ramp-step-uniformity"]
    assert ref_step_cv(spin.colors_at(np.linspace(0, 1, 1024))) > 5.0
    assert not verdicts(ramps["copy"])["ramp-lightness-monotone"]


# --- nodata and sampling keys -------------------------------------------------------------------

def test_automatic_nodata_is_a_neutral_gray_off_the_ramp():
    ramps = make(land=GOOD_SEQ, change=DIV, cover=_classes(GOOD_QUAL))
    for ramp in ramps.values():
        lut = ramp.lut()
        nd = ref_lab(lut.rgb8[[lut.nodata_index]].astype(float))[0]
        assert np.hypot(nd[1], nd[2]) <= 3.0
        drawn = ref_lab(lut.rgb8[:lut.n].astype(float))
        assert np.min(ref_de00(nd, drawn)) >= 10.0
        assert not ramp.nodata_given


def test_given_nodata_is_kept_even_when_poor():
    ramp = make(land={**GOOD_SEQ, "nodata": "#f5f0d8"})["land"]   # almost the light end
    assert ramp.nodata_given
    assert ramp.lut().rgb8[ramp.lut().nodata_index].tolist() == [0xf5, 0xf0, 0xd8]
    assert not verdicts(ramp)["nodata-separation"]


def test_outside_colors_default_to_the_end_colors_and_can_be_given():
    ramp = make(land=GOOD_SEQ)["land"]
    lut = ramp.lut()
    assert lut.rgb8[lut.outside_low_index].tolist() == lut.rgb8[0].tolist()
    assert lut.rgb8[lut.outside_high_index].tolist() == lut.rgb8[lut.n - 1].tolist()
    given = make(land={**GOOD_SEQ, "outside": {"low": "#000000", "high": {"L": 50, "C": 0, "h": 0}}})["land"]
    assert given.lut().rgb8[given.lut().outside_low_index].tolist() == [0, 0, 0]
    assert given.lut().rgb8[given.lut().outside_high_index].tolist() == [119, 119, 119]   # L* 50 grey


def test_build_only_the_used_ramps_and_their_twin_groups():
    # Building a subset gives the very same ramps as building all (our own invariant).
    from types import SimpleNamespace

    from compose.ramps import build_ramps

    t = {
        "base": {"kind": "sequential", "domain": [0, 1],
                 "through": [{"L": 90, "C": 10, "h": 100}, {"L": 30, "C": 30, "h": 150}]},
        "twin-a": {"twin": "base", "hue": [200, 260]},
        "other": {"kind": "sequential", "domain": [0, 5],
                  "through": [{"L": 85, "C": 20, "h": 60}, {"L": 35, "C": 40, "h": 20}]},
    }
    from pathlib import Path

    tables = {n: SimpleNamespace(name=n, table=v, path=Path("style.toml")) for n, v in t.items()}
    full = build_ramps(tables)
    part = build_ramps(tables, only={"twin-a", "not-a-ramp"})
    assert list(part) == ["base", "twin-a"]
    for name in part:
        for a, b in zip(part[name].pieces, full[name].pieces):
            np.testing.assert_array_equal(a.lab, b.lab)
    assert list(build_ramps(tables, only={"other"})) == ["other"]
