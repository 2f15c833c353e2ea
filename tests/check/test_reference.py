"""The report's numbers recomputed independently from the written PNG with colour-science
(sRGB IEC 61966-2-1 -> XYZ -> CIELAB D65, WCAG luminance = CIE Y): L*/C* percentiles within 0.5,
coverage and contrast shares within 1 %. Per-pixel colour-science on a 64 x 64 PNG is fine here."""
from __future__ import annotations

import json
import warnings

import numpy as np
import pytest

from compose.render import render_style
from compose.style import load_style
from tests.check._maps import field, lines, relief, style, write_style

colour = pytest.importorskip("colour")

GRAY = {"kind": "sequential", "domain": [0, 10],
        "through": [{"L": 30, "C": 0, "h": 0}, {"L": 90, "C": 0, "h": 0}]}


def lab_of(rgb):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb))


def y_of(rgb):
    return colour.sRGB_to_XYZ(rgb)[..., 1]


def pct(v, w=None):
    """p5/p50/p95 by the inverse of the (weighted) CDF, as numpy's 'inverted_cdf'."""
    v = np.asarray(v, float).ravel()
    w = np.ones_like(v) if w is None else np.asarray(w, float).ravel()
    keep = w > 0
    v, w = v[keep], w[keep]
    o = np.argsort(v)
    cdf = np.cumsum(w[o]) / w.sum()
    return [v[o][min(np.searchsorted(cdf, q - 1e-12), v.size - 1)] for q in (0.05, 0.5, 0.95)]


def render(tmp_path, doc):
    from matplotlib.image import imread
    st = load_style(write_style(tmp_path, doc))
    result = render_style(st, tmp_path / "out", legend=False)
    png = imread(result.outputs["png"])[..., :3].astype(float)
    report = json.loads(result.outputs["check"].read_text())
    return png, report, result


def layer(report, name):
    return next(s for s in report["layers"] if s["name"] == name)


def test_ground_and_theme_percentiles_match_colour_science(data, tmp_path):
    png, report, _ = render(tmp_path, style([relief(data["hills"])]))
    g = layer(report, "relief")
    assert g["coverage"] == pytest.approx(1.0)
    lch = colour.Lab_to_LCHab(lab_of(png))
    np.testing.assert_allclose([g["lightness"][k] for k in ("p5", "p50", "p95")],
                               pct(lch[..., 0]), atol=0.5)
    np.testing.assert_allclose([g["chroma"][k] for k in ("p5", "p50", "p95")],
                               pct(lch[..., 1]), atol=0.5)

    (tmp_path / "t").mkdir()
    png, report, _ = render(tmp_path / "t", style([relief(data["hills"]), field(data["gradient"])]))
    t = layer(report, "val")
    lch = colour.Lab_to_LCHab(lab_of(png))
    data_px = np.ones(png.shape[:2], bool)
    data_px[:6, :6] = False                    # the no-data corner is left out of the theme's numbers
    np.testing.assert_allclose([t["lightness"][k] for k in ("p5", "p50", "p95")],
                               pct(lch[..., 0][data_px]), atol=0.5)
    np.testing.assert_allclose([t["chroma"][k] for k in ("p5", "p50", "p95")],
                               pct(lch[..., 1][data_px]), atol=0.5)


def test_line_coverage_contrast_share_and_beneath_match(data, tmp_path):
    ground = {"name": "land", "role": "ground", "kind": "field", "source": str(data["halves"]),
              "ramp": "gray"}
    doc = style([ground, lines(data["coast"], stroke="#606060", width=1.5)], {"gray": GRAY})
    png, report, _ = render(tmp_path, doc)
    stroke = np.array([0x60] * 3) / 255.0
    under = np.broadcast_to(png[5:6], png.shape)            # row 5 is free of lines
    # normal blend: pixel = (1 - a) ground + a stroke  ->  a from the red channel
    alpha = np.clip((under[..., 0] - png[..., 0]) / (under[..., 0] - stroke[0]), 0, 1)
    alpha[alpha < 0.5 / 255] = 0
    coast = layer(report, "coast")
    assert coast["coverage"] == pytest.approx(alpha.sum() / alpha.size, rel=0.01)
    y_s, y_g = y_of(stroke), y_of(under)
    ratio = (np.maximum(y_s, y_g) + 0.05) / (np.minimum(y_s, y_g) + 0.05)
    share = (alpha * (ratio >= 3.0)).sum() / alpha.sum()    # WCAG 2.1 SC 1.4.11, 3:1
    assert 0.3 < share < 0.7
    assert coast["contrast_share"] == pytest.approx(share, abs=0.01)
    rule = next(r for r in report["rules"] if r["rule"] == "overlay-contrast")
    assert rule["value"] == pytest.approx(share, abs=0.01) and rule["passed"] is False
    # the median sits on the tie between the two equal halves, so only the tails are compared
    beneath = pct(lab_of(under)[..., 0], alpha)
    np.testing.assert_allclose([coast["beneath"]["lightness"][k] for k in ("p5", "p95")],
                               [beneath[0], beneath[2]], atol=0.5)
