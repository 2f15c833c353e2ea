"""The ramp figure draws what the checker judges: its rule results, the limits it judges by, and
proofs that keep the colours' CIELAB L* (checked against colour-science)."""
from __future__ import annotations

import numpy as np
import pytest

from compose.color import interface as ui
from compose.ramps import RampLimits, ramp_metrics, rule_checks
from compose.ramps.figure import panel_of, ramp_figure, write_ramp_plot
from compose.ramps.figure_classes import check_lines, gray_of
from tests.ramps.conftest import make

colour = pytest.importorskip("colour")

SEQ = {"kind": "sequential", "domain": [0, 12],
       "through": [{"L": 95, "C": 12, "h": 95}, {"L": 55, "C": 45, "h": 130}, {"L": 25, "C": 25, "h": 150}]}
# L* goes down, up, down: fails lightness-monotone and grayscale-order (our own counter-example)
BUMPY = {"kind": "sequential", "domain": [0, 12],
         "through": [{"L": 85, "C": 30, "h": 90}, {"L": 45, "C": 45, "h": 140}, {"L": 75, "C": 55, "h": 60},
                     {"L": 35, "C": 40, "h": 10}, {"L": 70, "C": 35, "h": 300}]}


def _texts(fig) -> list[str]:
    out = [t.get_text() for t in fig.texts]
    for ax in fig.axes:
        out += [t.get_text() for t in ax.texts]
        legend = ax.get_legend()
        if legend is not None:
            out += [t.get_text() for t in legend.get_texts()]
    return out


def _spans(fig, hex_color: str) -> int:
    """Patches (spans, bands) of exactly ``hex_color`` in the figure's axes."""
    want = np.array([int(hex_color[i:i + 2], 16) for i in (1, 3, 5)]) / 255
    n = 0
    for ax in fig.axes:
        for p in ax.patches:
            if np.allclose(p.get_facecolor()[:3], want, atol=1e-6):
                n += 1
    return n


@pytest.mark.parametrize("table", [SEQ, BUMPY], ids=["even", "bumpy"])
def test_every_rule_result_is_shown_with_its_mark_and_word(table):
    ramp = make(r=table)["r"]
    checks = rule_checks(ramp_metrics(ramp))
    texts = _texts(ramp_figure(ramp))
    for c in checks:
        first = check_lines(c)[0]
        assert first in texts, first
        assert first.startswith(("\u2713 pass", "\u2717 fail", "! warn"))
    failed = sum(not c.passed for c in checks)
    headline = [t for t in texts if "ramp rules" in t]
    assert len(headline) == 1
    assert headline[0].startswith("\u2717" if failed else "\u2713")


def test_reversals_are_shaded_only_where_lightness_turns_back():
    even, bumpy = make(r=SEQ)["r"], make(r=BUMPY)["r"]
    assert _spans(ramp_figure(even), ui.FAIL_LIGHT.hex) == 0
    assert _spans(ramp_figure(bumpy), ui.FAIL_LIGHT.hex) > 0


def test_limits_drawn_are_the_limits_judged():
    ramp = make(r=SEQ)["r"]
    lim = RampLimits(step_cv=7.5)
    texts = _texts(ramp_figure(ramp, limits=lim))
    assert any("CV ≤ 7.5 %" in t for t in texts)
    assert any("limit 7.5 %" in t for t in texts)     # the checker's own message, same limit


def test_theme_budget_band_when_budgets_are_given():
    from compose.style.model import Budgets, ThemeBudget

    ramp = make(r=SEQ)["r"]
    assert not any("theme budget" in t for t in _texts(ramp_figure(ramp)))
    budgets = Budgets(theme=ThemeBudget(chroma=(20.0, 60.0), chroma_min_stated=True))
    texts = _texts(ramp_figure(ramp, budgets=budgets))
    assert "theme budget: C* p50 ≥ 20, p95 ≤ 60" in texts


def test_every_rule_id_has_a_panel_or_goes_below():
    names = {"lightness-monotone": "lightness", "grayscale-order": "lightness",
             "ramp.nodata-chroma": "nodata", "twin-chroma": "chroma", "ramp-neutral-midpoint": "chroma",
             "ramp.step-uniformity": "evenness", "classes-separation-deutan": "difference",
             "ramp-break-visible": "difference", "threshold-lightness": "lightness",
             "classes-count": "other"}
    for rule, panel in names.items():
        assert panel_of(rule) == panel, rule


def test_gray_proof_keeps_cielab_lightness():
    rgb = np.random.default_rng(3).random((50, 3))
    lab_in = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb))
    lab_out = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(gray_of(rgb)))
    np.testing.assert_allclose(lab_out[:, 0], lab_in[:, 0], atol=0.02)
    np.testing.assert_allclose(lab_out[:, 1:], 0, atol=0.02)


def test_evenness_line_is_the_measured_variation():
    # the plotted steps (percent of the mean) vary exactly as the evenness rule measured
    ramp = make(r=BUMPY)["r"]
    fig = ramp_figure(ramp)
    ax = next(a for a in fig.axes if "% of the mean" in a.get_ylabel())
    y = max((ln.get_ydata() for ln in ax.get_lines()), key=len)
    cv = float(np.std(y) / np.mean(y) * 100)
    assert cv == pytest.approx(ramp_metrics(ramp).step_cv, rel=1e-6)


@pytest.mark.parametrize("table", [SEQ, {**SEQ, "steps": 6},
                                   {"kind": "diverging", "domain": [-2, 2],
                                    "through": [{"L": 35, "C": 25, "h": 250}, {"L": 96, "C": 0, "h": 0},
                                                {"L": 35, "C": 25, "h": 40}]},
                                   {"kind": "threshold", "domain": [0, 10], "at": 6,
                                    "below": [{"L": 92, "C": 10, "h": 200}, {"L": 60, "C": 30, "h": 230}],
                                    "above": [{"L": 58, "C": 45, "h": 40}, {"L": 35, "C": 40, "h": 25}]}],
                         ids=["sequential", "stepped", "diverging", "threshold"])
def test_png_is_written_whole(tmp_path, table):
    ramp = make(r=table)["r"]
    out = write_ramp_plot(ramp, tmp_path / "r.png")
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert [p.name for p in tmp_path.iterdir()] == ["r.png"]
