"""Twins of diverging ramps (comparable anomalies on land and in water) and the rule for which
kinds can be twinned. L*, C* and h are measured by colour-science on the drawn colours
(tests/ramps/conftest.py); limits as for sequential twins (1 L*, 1 C*)."""
from __future__ import annotations

import numpy as np
import pytest

from compose.errors import StyleError
from compose.ramps import ramp_metrics, rule_checks
from compose.ramps.build import TWIN_RULE
from tests.ramps.conftest import lch, make

CHANGE = {"kind": "diverging", "domain": [-4, 4], "center": 0,
          "through": [lch(30, 28, 268), lch(62, 30, 250), lch(96, 1, 90), lch(62, 34, 68),
                      lch(30, 30, 48)]}


def _ref_lch(rgb):
    import colour
    lab = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(np.asarray(rgb, dtype=float)))
    return colour.Lab_to_LCHab(lab)


def test_diverging_twin_matches_lightness_and_chroma_with_its_own_hues():
    ramps = make(land=CHANGE, water={"twin": "land", "hue": [300, 160]})
    land, water = ramps["land"], ramps["water"]
    assert water.kind == "diverging" and water.twin_of == "land" and water.center == 0
    v = np.linspace(-4, 4, 81)
    a, b = _ref_lch(land.colors_at(v)), _ref_lch(water.colors_at(v))
    assert np.max(np.abs(a[:, 0] - b[:, 0])) <= 1.0
    assert np.max(np.abs(a[:, 1] - b[:, 1])) <= 1.0
    low, high = b[v < -1], b[v > 1]
    def hue_gap(h, target):
        return np.abs((h - target + 180) % 360 - 180)

    assert np.all(hue_gap(low[:, 2], 300) < 3) and np.all(hue_gap(high[:, 2], 160) < 3)
    # still a good diverging ramp: symmetric lightness, neutral midpoint; twin rules pass
    verdicts = {c.rule: c.passed for c in rule_checks(ramp_metrics(water))}
    assert verdicts["ramp-diverging-symmetry"] and verdicts["ramp-neutral-midpoint"]
    assert verdicts["twin-lightness"] and verdicts["twin-chroma"]


def test_diverging_twin_with_its_own_domain():
    ramps = make(land=CHANGE, water={"twin": "land", "hue": [300, 160], "domain": [-2, 6]})
    water = ramps["water"]
    assert water.center == pytest.approx(2.0)
    np.testing.assert_allclose(_ref_lch(water.colors_at(np.array([2.0, 6.0])))[:, 0],
                               _ref_lch(ramps["land"].colors_at(np.array([0.0, 4.0])))[:, 0], atol=1.0)


def test_threshold_and_qualitative_cannot_be_twinned():
    thr = {"kind": "threshold", "domain": [0, 10], "at": 5,
           "below": [lch(90, 10, 200), lch(60, 30, 220)], "above": [lch(58, 40, 40), lch(40, 40, 30)]}
    with pytest.raises(StyleError, match="is a threshold ramp; sequential and diverging ramps can be twinned"):
        make(warm=thr, cold={"twin": "warm", "hue": [0, 10]})
    assert "threshold ramps cannot" in TWIN_RULE and "nor qualitative" in TWIN_RULE
