"""The draft check (``compose check --draft``): the same verdict as the full check on every
example style, rule by rule, on a canvas whose longer side is at most DRAFT_SIDE pixels, a whole
number of times coarser, read with decimated reads. Speed is measured by bench/check_draft.py,
never asserted here."""
from __future__ import annotations

from pathlib import Path

import pytest

from compose.api import check as check_report
from compose.check.draft import DRAFT_SIDE, draft_canvas
from compose.style import load_style

STYLES = Path(__file__).resolve().parents[2] / "styles"
EXAMPLES = ("coast", "sea-warmth", "change", "cover", "poor")


def test_draft_canvas_keeps_extent_and_dpi():
    full = load_style(STYLES / "coast.toml").canvas()
    d = draft_canvas(full)
    assert max(d.width, d.height) <= DRAFT_SIDE < max(full.width, full.height)
    assert d.dpi == full.dpi and d.crs == full.crs
    assert d.bounds == pytest.approx(full.bounds, abs=full.pixel * 4)
    factor = d.pixel / full.pixel
    assert factor == round(factor) >= 2         # draft pixels are blocks of whole canvas pixels


def test_draft_reads_are_decimated():
    from compose.engine import prepare

    style = load_style(STYLES / "coast.toml")
    prepared = prepare(style, canvas=draft_canvas(style.canvas()), draft=True)
    try:
        sources = [la.source for la in prepared.layers if hasattr(la, "source")
                   and hasattr(la.source, "decimate")]
        assert sources and all(s.decimate for s in sources)
    finally:
        prepared.close()


@pytest.mark.parametrize("name", EXAMPLES)
def test_draft_verdict_agrees_with_the_full_check(name):
    full = check_report(STYLES / f"{name}.toml")
    draft = check_report(STYLES / f"{name}.toml", draft=True)
    assert draft.draft is not None and full.draft is None
    assert draft.passed == full.passed
    assert {r.rule for r in draft.failures} == {r.rule for r in full.failures}
    # rule by rule: every (rule, layer) judged alike, warnings included
    verdicts = [{(r.rule, r.layer, r.ramp): (r.passed, r.met) for r in rep.rules}
                for rep in (full, draft)]
    assert verdicts[0] == verdicts[1]
