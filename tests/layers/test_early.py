"""A draft's raster reads started early on their own threads (compose.layers.early) give the
same pixels as the reads made when the window is painted."""
from __future__ import annotations

from pathlib import Path

import numpy as np

from compose.check.draft import draft_canvas
from compose.engine import prepare, render_window
from compose.style import load_style

STYLES = Path(__file__).resolve().parents[2] / "styles"


def test_early_reads_give_the_same_draft():
    style = load_style(STYLES / "coast.toml")
    prepared = prepare(style, canvas=draft_canvas(style.canvas()), draft=True)
    try:
        early = [la for la in prepared.layers if getattr(la, "early", None) is not None]
        assert {la.spec.kind for la in early} == {"field", "relief"}
        (window,) = prepared.windows()
        first = render_window(prepared, window)
        for layer in early:
            assert layer.early.take(window) is not None        # the window lies inside
            layer.early = None                                 # read when painted instead
        again = render_window(prepared, window)
        assert np.array_equal(first.rgb8, again.rgb8)
    finally:
        prepared.close()


def test_an_early_read_error_is_raised_where_the_layer_paints(tmp_path):
    from compose.canvas import Canvas
    from compose.layers.early import EarlyRead

    canvas = Canvas.from_extent("EPSG:32631", (0, 0, 100, 100), 10)

    def fail(window):
        raise OSError("gone")

    read = EarlyRead(canvas, fail)
    read.wait()
    try:
        read.take(canvas.whole(1))
    except OSError as exc:
        assert str(exc) == "gone"
    else:
        raise AssertionError("the read's error was not raised")


def test_a_draft_relief_read_in_one_piece_or_by_rows_is_the_same(monkeypatch):
    import compose.layers.relief as relief

    style = load_style(STYLES / "coast.toml")
    shades = []
    for cells in (relief.DRAFT_READ_CELLS, 0):          # one read of the region; 3 rows at a time
        monkeypatch.setattr(relief, "DRAFT_READ_CELLS", cells)
        prepared = prepare(style, canvas=draft_canvas(style.canvas()), draft=True)
        try:
            layer = next(la for la in prepared.layers if la.spec.kind == "relief")
            (window,) = prepared.windows()
            shades.append(layer._draft_shade(window))
        finally:
            prepared.close()
    assert np.array_equal(shades[0], shades[1], equal_nan=True)
