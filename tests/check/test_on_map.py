"""Twin matching and diverging symmetry judged on the map (issue 10): the composite the reader
sees, from the render's merged histograms, in normal vision and under deutan / protan simulation
(Machado, Oliveira & Fernandes 2009, severity 100). Each case has ramps that pass the palette
rules (``twin-lightness``, ``ramp-diverging-symmetry``) but are drawn so that the map breaks them;
the limits are our design targets (no source)."""
from __future__ import annotations

import numpy as np

from compose.check.on_map import fill_gaps, pooled_gap, position_groups
from tests.check._maps import LAND, apply_change, check, field, relief, style

SEA = {"twin": "land", "hue": [215, 240]}
ORANGE = {"L": 80, "C": 40, "h": 60}          # a saturated ground tint, as in styles/poor.toml


def one(report, rule):
    got = [r for r in report.rules if r.rule == rule]
    assert len(got) == 1, [r.to_json() for r in report.rules]
    return got[0]


def twins(data, ground=None, sea=None, ramps=None):
    return style([relief(data["hills"], **(ground or {})),
                  field(data["west"], name="land", nodata="transparent", blend="multiply"),
                  field(data["east"], ramp="sea", name="sea", nodata="transparent",
                        blend="multiply", **(sea or {}))],
                 ramps or {"land": LAND, "sea": SEA})


def test_matched_twins_pass_on_the_map_over_uneven_terrain(data, tmp_path):
    # the two halves lie on different hills; the lit-end measure does not read shading as mismatch
    rep = check(tmp_path, twins(data))
    for rule in ("twin-lightness-map", "twin-lightness-map-deutan", "twin-lightness-map-protan"):
        r = one(rep, rule)
        assert r.passed and r.value is not None, r.message
    assert one(rep, "twin-lightness-map").value < 1.0


def test_a_fainter_twin_fails_on_the_map_though_its_ramp_matches(data, tmp_path):
    doc = twins(data, sea={"opacity": 0.6})
    rep = check(tmp_path, doc, "faint")
    assert one(rep, "twin-lightness").passed                 # the palette cannot see it
    bad = one(rep, "twin-lightness-map")
    assert not bad.passed and bad.value > 5 and "drawn on the map" in bad.message
    assert bad.change.values == {"opacity": 1.0}
    fixed = check(tmp_path, apply_change(doc, bad.change), "faint-fixed")
    assert one(fixed, "twin-lightness-map").passed


def test_a_colored_ground_splits_the_twins_and_a_neutral_tint_fixes_it(data, tmp_path):
    # an orange ground multiplied under blue sea and green land darkens the sea far more
    doc = twins(data, ground={"tint": ORANGE, "blend": "multiply"})
    rep = check(tmp_path, doc, "orange")
    assert one(rep, "twin-lightness").passed
    bad = one(rep, "twin-lightness-map")
    assert not bad.passed and bad.value > 3
    assert bad.change.table == 'layer "relief"' and set(bad.change.values) == {"tint"}
    fixed = check(tmp_path, apply_change(doc, bad.change), "orange-fixed")
    for rule in ("twin-lightness-map", "twin-lightness-map-deutan", "twin-lightness-map-protan"):
        assert one(fixed, rule).passed


def test_twins_that_part_under_protan_simulation_fail_with_a_ramp_fix(data, tmp_path):
    # a red base and a green twin at equal L* and C*: equal in normal vision, but a protan
    # reader sees the saturated red much darker (Machado et al. 2009 simulation)
    red = {"kind": "sequential", "domain": [0, 10],
           "through": [{"L": 85, "C": 20, "h": 40}, {"L": 55, "C": 60, "h": 30},
                       {"L": 35, "C": 50, "h": 25}]}
    rep = check(tmp_path, twins(data, ramps={"land": red, "sea": {"twin": "land",
                                                                  "hue": [140, 150]}}), "red")
    assert one(rep, "twin-lightness").passed and one(rep, "twin-lightness-map").passed
    bad = one(rep, "twin-lightness-map-protan")
    assert not bad.passed and bad.limit == 6
    assert "before any layer is blended" in bad.fix and bad.change is None


def _div():
    return {"kind": "diverging", "domain": [0, 10], "center": 5,
            "through": [{"L": 40, "C": 28, "h": 250}, {"L": 95, "C": 0, "h": 90},
                        {"L": 40, "C": 28, "h": 30}]}


def test_diverging_arms_judged_on_the_map(data, tmp_path):
    ok = check(tmp_path, style([relief(data["hills"], blend="multiply"),
                                field(data["gradient"], ramp="d", blend="multiply")], {"d": _div()}))
    for rule in ("diverging-symmetry-map", "diverging-symmetry-map-deutan",
                 "diverging-symmetry-map-protan"):
        assert one(ok, rule).passed and one(ok, rule).value is not None
    doc = style([relief(data["hills"], tint=ORANGE, blend="multiply"),
                 field(data["gradient"], ramp="d", blend="multiply")], {"d": _div()})
    rep = check(tmp_path, doc, "orange")
    assert one(rep, "ramp-diverging-symmetry").passed       # the palette is symmetric
    bad = one(rep, "diverging-symmetry-map")
    assert not bad.passed and bad.value > 2
    assert bad.change.values == {"blend": "normal", "opacity": 0.85}
    fixed = check(tmp_path, apply_change(doc, bad.change), "normal")
    assert one(fixed, "diverging-symmetry-map").passed
    assert one(fixed, "diverging-symmetry-map-deutan").passed


def test_pooling_helpers():
    g = position_groups(7, 4, 2)
    assert g.tolist() == [0, 0, 1, 1, -1, -1, -1]
    L, w = fill_gaps(np.array([50.0, np.nan, 40.0, np.nan]), np.array([10.0, 0.0, 4.0, 0.0]))
    assert L[1] == 45.0 and w[1] == 4.0 and np.isnan(L[3])       # only gaps between two drawn
    # weighted p90: the heavy small gaps decide, one light large gap does not
    a = np.array([50.0, 60.0, 70.0])
    b = np.array([50.5, 60.5, 80.0])
    value, i = pooled_gap(a, b, np.array([100.0, 100.0, 1.0]), np.array([100.0, 100.0, 1.0]))
    assert value == 0.5 and i in (0, 1)
    assert pooled_gap(a, np.full(3, np.nan), np.ones(3), np.ones(3)) is None
