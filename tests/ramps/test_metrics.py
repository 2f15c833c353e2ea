"""Ramp metrics recomputed independently with colour-science (and SciPy for rank correlation).

Tolerances: our CIELAB and colour-science's share the IEC 4-digit matrix and the xy D65 white
(references.md section 1), so L*, C* and dE00 agree to ~1e-3; CAM02-UCS white points differ
slightly (references.md section 3), so step CVs agree to ~0.2 percentage points.
"""
from __future__ import annotations

import dataclasses

import colour
import numpy as np
import pytest
from scipy.stats import spearmanr

from compose.check.catalog import CATALOG, limit_of
from compose.ramps import RampLimits, ramp_metrics, rule_checks
from compose.ramps.metrics import COARSE_SAMPLES, EVEN_STEPS, ORDER_SAMPLES, spearman

from .conftest import lch, make, ref_de00, ref_lab, ref_lch, ref_min_pairwise, ref_step_cv, ref_vision_lab

SEQ = {"kind": "sequential", "domain": [0, 12],
       "through": [lch(95, 12, 100), lch(70, 38, 125), lch(45, 32, 150), lch(25, 20, 165)]}
QUAL = {"kind": "qualitative", "classes": [
    {"value": 1, "color": lch(34, 26, 155), "family": "woody"},
    {"value": 2, "color": lch(46, 44, 122), "family": "woody"},
    {"value": 3, "color": lch(63, 40, 111), "family": "woody"},
    {"value": 4, "color": lch(91, 60, 100), "family": "farmed"},
    {"value": 5, "color": lch(78, 26, 80), "family": "farmed"},
    {"value": 6, "color": lch(65, 24, 207)}]}


def test_sequential_metrics_against_colour_science():
    ramp = make(land=SEQ)["land"]
    m = ramp_metrics(ramp)
    values = np.linspace(0, 12, ramp.samples)
    rgb8 = np.rint(ramp.colors_at(values) * 255)
    L = ref_lab(rgb8)[:, 0]
    lch8 = ref_lch(rgb8)
    assert m.lightness_range == pytest.approx((L.min(), L.max()), abs=1e-2)
    assert m.chroma_range[1] == pytest.approx(lch8[:, 1].max(), abs=1e-2)
    assert m.grayscale_rho == pytest.approx(spearmanr(values, L).statistic, abs=1e-9)
    coarse = np.rint(ramp.colors_at(np.linspace(0, 12, COARSE_SAMPLES)) * 255) / 255
    assert m.step_cv_8bit == pytest.approx(ref_step_cv(coarse), abs=0.3)
    assert m.step_cv == pytest.approx(ref_evenness(ramp), abs=0.3)
    order = np.rint(ramp.colors_at(np.linspace(0, 12, ORDER_SAMPLES)) * 255)
    for vision in ("normal", "deutan", "protan", "tritan"):
        lab = ref_vision_lab(order, vision)
        assert m.min_step_de00[vision] == pytest.approx(np.min(ref_de00(lab[:-1], lab[1:])), abs=1e-2)
    nd = ref_lab(np.rint(np.array([ramp.nodata]) * 255))[0]
    drawn = ref_lab(np.concatenate([rgb8, np.rint(np.array([ramp.outside_low, ramp.outside_high]) * 255)]))
    assert m.nodata_min_de00 == pytest.approx(np.min(ref_de00(nd, drawn)), abs=1e-2)


def test_qualitative_metrics_against_colour_science():
    ramp = make(cover=QUAL)["cover"]
    m = ramp_metrics(ramp)
    rgb8 = ramp.lut().rgb8[:6].astype(float)
    for vision in ("normal", "deutan", "protan", "tritan"):
        assert m.min_pair_de00[vision] == pytest.approx(ref_min_pairwise(ref_vision_lab(rgb8, vision)), abs=1e-2)
    woody = ref_vision_lab(rgb8[:3], "deutan")
    assert m.family_min_pair_de00["woody"]["deutan"] == pytest.approx(ref_min_pairwise(woody), abs=1e-2)
    assert set(m.family_min_pair_de00) == {"woody", "farmed"}
    assert m.class_count == 6 and m.lightness_monotone is None and m.step_cv is None


def test_stepped_metrics_use_the_class_colors():
    ramp = make(land={**SEQ, "steps": 5})["land"]
    m = ramp_metrics(ramp)
    classes = ramp.lut().rgb8[:5].astype(float)
    for vision in ("normal", "deutan"):
        lab = ref_vision_lab(classes, vision)
        assert m.min_step_de00[vision] == pytest.approx(np.min(ref_de00(lab[:-1], lab[1:])), abs=1e-2)
        assert m.min_pair_de00[vision] == pytest.approx(ref_min_pairwise(lab), abs=1e-2)
    rules = {c.rule for c in rule_checks(m)}
    assert {"classes-separation", "classes-separation-deutan", "classes-count"} <= rules


def test_diverging_and_threshold_metrics_against_colour_science():
    div = {"kind": "diverging", "domain": [-2, 4], "center": 1,
           "through": [lch(30, 28, 268), lch(96, 1, 90), lch(40, 30, 48)]}
    warm = {"kind": "threshold", "domain": [14, 30], "at": 26,
            "below": [lch(93, 10, 190), lch(62, 30, 240)], "above": [lch(61, 62, 58), lch(34, 52, 30)]}
    ramps = make(div=div, warm=warm)
    m = ramp_metrics(ramps["div"])
    d = np.linspace(0, 3, 257)
    lo = ref_lab(np.rint(ramps["div"].colors_at(1 - d) * 255))[:, 0]
    hi = ref_lab(np.rint(ramps["div"].colors_at(1 + d) * 255))[:, 0]
    assert m.symmetry_dl_max == pytest.approx(np.max(np.abs(lo - hi)), abs=1e-2)
    assert m.symmetry_dl_max > 5    # the arms end at L* 30 and 40
    assert m.midpoint_chroma == pytest.approx(ref_lch(np.rint(ramps["div"].colors_at([1.0]) * 255))[0, 1], abs=1e-2)
    t = ramp_metrics(ramps["warm"])
    lut = ramps["warm"].lut()
    pair = lut.rgb8[[lut.split[1] - 1, lut.split[1]]].astype(float)
    lab = ref_lab(pair)
    assert t.break_dl == pytest.approx(abs(lab[1, 0] - lab[0, 0]), abs=1e-2)
    assert t.break_de00 == pytest.approx(ref_de00(lab[0], lab[1]), abs=1e-2)
    assert 0.5 < t.break_dl < 1.5


def test_spearman_matches_scipy_with_ties():
    rng = np.random.default_rng(5)
    x = rng.integers(0, 6, 200).astype(float)
    y = x * 2 + rng.normal(size=200)
    assert spearman(x, y) == pytest.approx(spearmanr(x, y).statistic, abs=1e-12)


def ref_evenness(ramp, steps=EVEN_STEPS) -> float:
    """Worst CV (%) over step sizes g of CAM02-UCS differences (colour-science) of the 8-bit
    colours at equal data steps (a sequential ramp: one run)."""
    v = np.linspace(*ramp.domain, steps + 1)
    rgb = np.rint(ramp.colors_at(v) * 255) / 255
    ucs = colour.XYZ_to_CAM02UCS(colour.sRGB_to_XYZ(rgb))
    cvs = []
    for g in range(1, steps // 2 + 1):
        d = np.linalg.norm(ucs[g:] - ucs[:-g], axis=-1)
        cvs.append(100 * d.std() / d.mean())
    return max(cvs)


def _uneven(ramp, power=2.0):
    """The same colours crowded toward the low end of the domain: value = lo + (hi - lo) u^power
    along the curve (what pinned stops or a hand-made table can do)."""
    (p,) = ramp.pieces
    u = (p.values - p.lo) / (p.hi - p.lo)
    piece = dataclasses.replace(p, values=p.lo + (p.hi - p.lo) * u ** power)
    return dataclasses.replace(ramp, pieces=(piece,))


def test_an_uneven_ramp_fails_evenness_and_an_even_one_passes():
    # issue 10: evenness was measured along the re-spaced curve and could not fail
    ramp = make(land=SEQ)["land"]
    assert ramp_metrics(ramp).step_cv <= 10
    v = {c.rule: c.passed for c in rule_checks(ramp_metrics(ramp))}
    assert v["ramp-step-uniformity"]
    uneven = _uneven(ramp)
    m = ramp_metrics(uneven)
    assert m.step_cv > 30 and m.step_cv == pytest.approx(ref_evenness(uneven), abs=0.5)
    assert not {c.rule: c.passed for c in rule_checks(m)}["ramp-step-uniformity"]


def test_a_ramp_whose_lightness_turns_back_is_uneven():
    # "bumpy" of styles/poor-ramps.toml: even along its curve, but values far apart look alike
    bumpy = {"kind": "sequential", "domain": [0, 12], "through": [
        lch(85, 30, 95), lch(45, 45, 140), lch(75, 55, 60), lch(35, 45, 20), lch(70, 35, 300)]}
    m = ramp_metrics(make(bumpy=bumpy)["bumpy"])
    assert m.step_cv > 20
    assert not {c.rule: c.passed for c in rule_checks(m)}["ramp-step-uniformity"]


def test_ramp_rules_use_the_checkers_ids_and_limits():
    # issue 10: one catalogue -- `compose ramp` and `compose check` name and limit a measurement
    # the same way (gray order was 0.98 here and 0.95 in the checker)
    from compose.style.model import Budgets
    lim = RampLimits.from_budgets(Budgets())
    assert lim.grayscale_rho == limit_of("grayscale-order", Budgets())[0] == 0.95
    assert lim.step_cv == limit_of("ramp-step-uniformity", Budgets())[0]
    assert lim.class_separation == limit_of("classes-separation", Budgets())[0]
    assert lim.break_dl == limit_of("threshold-lightness", Budgets())[0]


def test_rule_checks_shape_and_limits():
    m = ramp_metrics(make(land=SEQ)["land"])
    checks = rule_checks(m)
    for c in checks:
        rule, passed, value, limit, message = c      # a plain 5-tuple as well
        assert rule in CATALOG and isinstance(passed, bool) and message.startswith('ramp "land": ')
    strict = rule_checks(m, RampLimits(step_cv=0.0))
    assert not {c.rule: c.passed for c in strict}["ramp-step-uniformity"]


def test_twin_rules_fail_when_the_match_is_off():
    ramps = make(land=SEQ, sea={"twin": "land", "hue": [185, 235]})
    m = dataclasses.replace(ramp_metrics(ramps["sea"]), twin_dl_max=2.0, twin_dc_max=3.0)
    v = {c.rule: c.passed for c in rule_checks(m)}
    assert not v["twin-lightness"] and not v["twin-chroma"]
