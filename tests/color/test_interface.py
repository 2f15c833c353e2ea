"""The interface colours (compose.color.interface) against our own contrast rules.

Sources: WCAG 2.2 (W3C Recommendation, 2023) SC 1.4.3 contrast (minimum) 4.5:1 for text and
SC 1.4.11 non-text contrast 3:1, with the relative-luminance definition computed here through
colour-science's sRGB -> XYZ (outside reference); Machado, Oliveira & Fernandes (2009) CVD
simulation at severity 1.0, matrices from colour-science; CIEDE2000 by colour-science.
The separations asked of pass vs fail in simulation (dE00 >= 15 for text and marks, >= 10 for
light bars) are our own rule (common practice, no source).
"""
from __future__ import annotations

import re
import warnings
from pathlib import Path

import numpy as np
import pytest

from compose.color import interface as ui
from compose.color.cvd import simulate_cvd
from compose.color.gamut import lch_in_gamut
from compose.color.wcag import contrast_ratio
from tests.conftest import delta_e00_reference

colour = pytest.importorskip("colour")

CS_NAMES = {"protan": "Protanomaly", "deutan": "Deuteranomaly"}
PACKAGE = Path(__file__).resolve().parents[2] / "compose"


def _cs_contrast(a: ui.Swatch, b: ui.Swatch) -> float:
    """WCAG contrast with Y from colour-science (sRGB IEC 61966-2-1 decoding, D65)."""
    ya, yb = (float(colour.sRGB_to_XYZ(np.array(s.rgb))[1]) for s in (a, b))
    return (max(ya, yb) + 0.05) / (min(ya, yb) + 0.05)


def _cs_simulate(s: ui.Swatch, kind: str) -> np.ndarray:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m = colour.matrix_cvd_Machado2009(CS_NAMES[kind], 1.0)
    lin = colour.cctf_decoding(np.array(s.rgb), function="sRGB")
    return np.clip(colour.cctf_encoding(np.clip(lin @ m.T, 0, 1), function="sRGB"), 0, 1)


def test_names_are_unique_and_every_swatch_is_listed():
    names = [s.name for s in ui.SWATCHES]
    assert len(names) == len(set(names))
    listed = {v for k, v in vars(ui).items() if isinstance(v, ui.Swatch)}
    assert listed == set(ui.SWATCHES)


@pytest.mark.parametrize("s", ui.SWATCHES, ids=lambda s: s.name)
def test_each_choice_is_inside_srgb_and_its_hex_is_the_stated_lch(s):
    assert lch_in_gamut(np.array([s.L, s.C, s.h])), f"{s.name} is outside sRGB"
    assert re.fullmatch(r"#[0-9a-f]{6}", s.hex)
    # colour-science's LCh -> sRGB of the stated choice rounds to the same 8-bit codes (+-1)
    ref = colour.XYZ_to_sRGB(colour.Lab_to_XYZ(colour.LCHab_to_Lab(np.array([s.L, s.C, s.h]))))
    np.testing.assert_allclose(np.array(s.rgb) * 255, np.clip(ref, 0, 1) * 255, atol=1.0)
    # and the drawn colour is the stated one to within 8-bit rounding
    lab = colour.LCHab_to_Lab(np.array([s.L, s.C, s.h]))
    assert float(delta_e00_reference(np.array(s.rgb), colour.XYZ_to_sRGB(colour.Lab_to_XYZ(lab)))) < 0.6


@pytest.mark.parametrize("text,background,where", ui.TEXT_PAIRS, ids=lambda x: getattr(x, "name", x))
def test_text_reaches_wcag_aa_on_its_background(text, background, where):
    ref = _cs_contrast(text, background)
    assert ref >= ui.TEXT_CONTRAST, f"{where}: {text.name} on {background.name} is {ref:.2f}:1"
    assert float(contrast_ratio(np.array(text.rgb), np.array(background.rgb))) == pytest.approx(ref, rel=1e-6)


@pytest.mark.parametrize("mark,background,what", ui.GRAPHIC_PAIRS, ids=lambda x: getattr(x, "name", x))
def test_marks_reach_non_text_contrast(mark, background, what):
    ref = _cs_contrast(mark, background)
    assert ref >= ui.GRAPHIC_CONTRAST, f"{what}: {mark.name} on {background.name} is {ref:.2f}:1"


@pytest.mark.parametrize("kind", ["deutan", "protan"])
@pytest.mark.parametrize("a,b,least", [(ui.PASS, ui.FAIL, 15.0), (ui.PASS_LIGHT, ui.FAIL_LIGHT, 10.0)],
                         ids=["text", "bars"])
def test_pass_and_fail_stay_apart_in_dichromat_simulation(kind, a, b, least):
    ours = [simulate_cvd(np.array(s.rgb), kind) for s in (a, b)]
    ref = [_cs_simulate(s, kind) for s in (a, b)]
    np.testing.assert_allclose(ours, ref, atol=1e-6)
    d = float(delta_e00_reference(ref[0], ref[1]))
    assert d >= least, f"{kind}: {a.name} vs {b.name} only dE00 {d:.1f} apart"


def test_a_common_red_green_pair_would_fail_that_rule():
    # the rule can fail: a mid green and a mid red of equal lightness collapse under deuteranopia
    green, red = ui.Swatch("g", 42, 55, 140, ""), ui.Swatch("r", 42, 60, 35, "")
    d = float(delta_e00_reference(_cs_simulate(green, "deutan"), _cs_simulate(red, "deutan")))
    assert d < 15.0


def test_verdicts_carry_a_mark_and_a_word():
    assert ui.verdict_mark(True) == "\u2713 pass"
    assert ui.verdict_mark(False) == "\u2717 fail"
    assert "not judged" in ui.verdict_mark(None)
    assert ui.verdict_color(True) is ui.PASS and ui.verdict_color(False) is ui.FAIL
    assert ui.verdict_color(None) is ui.MUTED


def test_css_variables_hold_every_swatch():
    css = ui.css_variables()
    for s in ui.SWATCHES:
        assert f"--{s.name}: {s.hex};" in css


def test_no_hand_written_interface_color_in_the_package():
    # Interface colours are derived from compose.color.interface; the only hex literals left are
    # the map's own style defaults (style/kinds.py), which are style values, not interface, and
    # the examples in interface.py's docstrings.
    allowed = {"style/kinds.py", "color/interface.py"}
    found = {}
    for path in PACKAGE.rglob("*.py"):
        rel = path.relative_to(PACKAGE).as_posix()
        hits = re.findall(r"(?<![\w&])#[0-9a-fA-F]{3}(?:[0-9a-fA-F]{3}(?:[0-9a-fA-F]{2})?)?\b",
                          path.read_text())
        if hits and rel not in allowed:
            found[rel] = hits
    assert not found
