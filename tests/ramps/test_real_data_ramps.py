"""Ramps for real data: a domain written high to low, ``reverse = true``, stops pinned to data
values. Colours are compared in CIEDE2000 computed by colour-science (tests/conftest.py)."""
from __future__ import annotations

import numpy as np
import pytest

from compose.errors import StyleError
from compose.ramps.lut import lut_for
from tests.conftest import assert_colors_close
from tests.ramps.conftest import make

STOPS = ["#f7fbff", "#6baed6", "#08306b"]     # light to dark: "more is darker"
HEX = np.array([[0xf7, 0xfb, 0xff], [0x6b, 0xae, 0xd6], [0x08, 0x30, 0x6b]]) / 255.0


def test_descending_domain_and_reverse_flip_the_ramp():
    r = make(up={"kind": "sequential", "through": STOPS, "domain": [0, 200]},
             down={"kind": "sequential", "through": STOPS, "domain": [200, 0]},
             rev={"kind": "sequential", "through": STOPS, "domain": [0, 200], "reverse": True},
             both={"kind": "sequential", "through": STOPS, "domain": [200, 0], "reverse": True})
    v = np.linspace(0, 200, 41)
    assert r["down"].domain == (0.0, 200.0)
    # depth 200 is the first stop's colour when the domain runs 200 -> 0
    assert_colors_close(r["down"].colors_at(np.array(200.0)), HEX[0], 0.5)
    assert_colors_close(r["down"].colors_at(np.array(0.0)), HEX[2], 0.5)
    assert_colors_close(r["down"].colors_at(v), r["up"].colors_at(200 - v), 0.5)
    np.testing.assert_array_equal(r["rev"].colors_at(v), r["down"].colors_at(v))
    np.testing.assert_array_equal(r["both"].colors_at(v), r["up"].colors_at(v))
    # the drawn table runs the same way
    lut = lut_for(r["down"])
    assert_colors_close(lut.rgb8[lut.index(np.array([195.0]))] / 255.0, HEX[0], 2.0)


def test_diverging_reverse_swaps_the_arms():
    stops = ["#2166ac", "#f7f7f7", "#b2182b"]
    r = make(a={"kind": "diverging", "through": stops, "domain": [-4, 4], "center": 0},
             b={"kind": "diverging", "through": stops, "domain": [-4, 4], "center": 0, "reverse": True})
    v = np.linspace(-4, 4, 33)
    assert_colors_close(r["b"].colors_at(v), r["a"].colors_at(-v), 0.5)


def test_pinned_stops_sit_at_their_values():
    r = make(p={"kind": "sequential", "through": STOPS, "values": [0, 10, 200]},
             q={"kind": "sequential", "through": STOPS[::-1], "values": [200, 10, 0]},
             rp={"kind": "sequential", "through": STOPS, "values": [0, 10, 200], "reverse": True})
    assert r["p"].domain == (0.0, 200.0)
    assert_colors_close(r["p"].colors_at(np.array([0.0, 10.0, 200.0])), HEX, 0.5)
    # listed from high to low: the same ramp
    np.testing.assert_allclose(r["q"].colors_at(np.linspace(0, 200, 21)),
                               r["p"].colors_at(np.linspace(0, 200, 21)), atol=1e-9)
    # reversed: stop colours at mirrored values (190 = 0 + 200 - 10)
    assert_colors_close(r["rp"].colors_at(np.array([0.0, 190.0, 200.0])), HEX[::-1], 0.5)
    # lightness still falls monotonically through the pinned stop
    from compose.color.lab import srgb_to_lab
    L = srgb_to_lab(r["p"].colors_at(np.linspace(0, 200, 401)))[:, 0]
    assert np.all(np.diff(L) <= 1e-6)


@pytest.mark.parametrize("table,message", [
    ({"kind": "threshold", "domain": [30, 10], "at": 20, "below": STOPS[:2], "above": STOPS[1:]},
     "a domain from high to low is for sequential and diverging ramps"),
    ({"kind": "sequential", "through": STOPS, "values": [0, 10]}, "one data value per stop (3)"),
    ({"kind": "sequential", "through": STOPS, "values": [0, 10, 5]}, "increase (or decrease) strictly"),
    ({"kind": "sequential", "through": STOPS, "values": [0, 10, 20], "domain": [0, 30]},
     "must span the first to the last of 'values'"),
    ({"kind": "sequential", "through": STOPS, "reverse": "yes"}, "'reverse' must be true or false"),
    ({"kind": "sequential", "through": STOPS, "domain": [3, 3]}, "two different values"),
])
def test_errors(table, message):
    with pytest.raises(StyleError, match=message.replace("(", r"\(").replace(")", r"\)")):
        make(bad=table)
