"""The draft check (``compose check --draft``): the same verdict as the full check on every
example style, on a canvas whose longer side is at most DRAFT_SIDE pixels. Speed is measured by
bench/check_draft.py, never asserted here."""
from __future__ import annotations

from pathlib import Path

import pytest

from compose.check.draft import DRAFT_SIDE, draft_canvas
from compose.api import check as check_report
from compose.style import load_style

STYLES = Path(__file__).resolve().parents[2] / "styles"
EXAMPLES = ("coast", "sea-warmth", "change", "cover", "poor")


def test_draft_canvas_keeps_extent_and_dpi():
    full = load_style(STYLES / "coast.toml").canvas()
    d = draft_canvas(full)
    assert max(d.width, d.height) <= DRAFT_SIDE < max(full.width, full.height)
    assert d.dpi == full.dpi and d.crs == full.crs
    assert d.bounds == pytest.approx(full.bounds, abs=full.pixel * 4)


@pytest.mark.parametrize("name", EXAMPLES)
def test_draft_verdict_agrees_with_the_full_check(name):
    full = check_report(STYLES / f"{name}.toml")
    draft = check_report(STYLES / f"{name}.toml", draft=True)
    assert draft.draft is not None and full.draft is None
    assert draft.passed == full.passed
    assert {r.rule for r in draft.failures} == {r.rule for r in full.failures}
