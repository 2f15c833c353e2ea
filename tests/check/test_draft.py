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


def test_a_draft_shades_the_full_canvas_cells_on_rough_terrain(tmp_path):
    """Shading is not linear: the shade of a block-averaged DEM is flatter than the shades of the
    block's cells. On terrain rough at the cell scale (noise of 40 m on 30 m cells, as
    bench/render.py's DEM), a draft 6x coarser read the relief's L* spread and its p5 several
    units off the full check's; it now samples the full canvas's own shades (and its "auto"
    stretch from the full canvas's cells), so they agree to a fraction of a unit."""
    import numpy as np
    import rasterio
    from affine import Affine

    n = 2304
    rng = np.random.default_rng(3)
    yy, xx = np.mgrid[0:n, 0:n] / n
    dem = (np.sin(xx * 9) * np.cos(yy * 7) * 300 + rng.normal(0, 40, (n, n)) + 800)
    with rasterio.open(tmp_path / "dem.tif", "w", driver="GTiff", width=n, height=n, count=1,
                       dtype="float32", crs="EPSG:32630", tiled=True, blockxsize=256,
                       blockysize=256, transform=Affine(30, 0, 400000, 0, -30, 4600000)) as ds:
        ds.write(dem.astype("float32"), 1)
    (tmp_path / "rough.toml").write_text(
        '[map]\ncrs = "EPSG:32630"\n'
        f"extent = [400000, {4600000 - 30 * n}, {400000 + 30 * n}, 4600000]\npixel = 30\n"
        '[[layer]]\nname = "relief"\nrole = "ground"\nkind = "relief"\nsource = "dem.tif"\n')
    full = check_report(tmp_path / "rough.toml")
    draft = check_report(tmp_path / "rough.toml", draft=True)
    assert "384 x 384 of 2304 x 2304" in draft.draft
    for rule in ("relief-visible", "ground-lightness"):
        (f,), (d,) = full.rule(rule, "relief"), draft.rule(rule, "relief")
        assert f.passed == d.passed
        assert np.allclose(d.value, f.value, atol=0.5), (rule, f.value, d.value)


def test_draft_labels_keep_clear_of_the_furniture_scaled_to_its_canvas():
    # the full render's keep-clear boxes (page furniture inside the map frame, in full-canvas
    # pixels) are scaled to the draft's coarser grid, so its labels avoid the same ground
    from compose.engine import prepare

    style = load_style(STYLES / "base.toml")
    full = style.canvas()
    box = (0.0, 0.0, full.width / 2, full.height / 2)           # the north-west quarter
    d = draft_canvas(full)
    prepared = prepare(style, canvas=d, draft=True, keep_clear=lambda *_: [box])
    free = prepare(style, canvas=d, draft=True)
    try:
        k = full.pixel / d.pixel
        assert len(prepared.blocked) == 1
        assert list(prepared.blocked[0]) == pytest.approx([0.0, 0.0, box[2] * k, box[3] * k])
        labels = [la for la in prepared.layers if la.spec.kind == "labels"]
        assert labels and free.blocked == ()
        assert sum(len(la.placement.placed) for la in labels) \
            < sum(len(la.placement.placed) for la in free.layers if la.spec.kind == "labels")
        for la in labels:
            for lab in la.placement.placed:
                c0, r0, c1, r1 = lab.box
                assert not (c0 < box[2] * k and r0 < box[3] * k)
    finally:
        prepared.close()
        free.close()
