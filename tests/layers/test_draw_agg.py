"""compose.layers.draw drives matplotlib's C++ Agg renderer with a graphics context of its own
(no matplotlib backend_bases at import): the coverage and the text boxes it gives are exactly
those of matplotlib's own Agg backend (the reference: matplotlib.backends.backend_agg.RendererAgg
with a GraphicsContextBase set as compose sets it), strokes, fills, caps, joins, widths, text."""
from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
import shapely
from affine import Affine

from compose.layers import draw

W, H = 64, 48
T = Affine(1.0, 0, 0, 0, -1.0, H)


def _reference(paths_gcs) -> np.ndarray:
    from matplotlib.backends.backend_agg import RendererAgg
    from matplotlib.transforms import IdentityTransform

    r = RendererAgg(W, H, 72.0)
    for path, width, cap, join, fill in paths_gcs:
        gc = r.new_gc()
        gc.set_antialiased(True)
        gc.set_snap(False)
        gc.set_foreground((0.0, 0.0, 0.0, 1.0))
        gc.set_linewidth(float(width))
        gc.set_capstyle(cap)
        gc.set_joinstyle(join)
        r.draw_path(gc, path, IdentityTransform(), (0.0, 0.0, 0.0, 1.0) if fill else None)
    return np.asarray(r.buffer_rgba())[..., 3].copy()


def _ours(paths_gcs) -> np.ndarray:
    c = draw._Canvas(W, H)
    for path, width, cap, join, fill in paths_gcs:
        gc = c.gc(width, {"projecting": "square"}.get(cap, cap), join)
        (c.fill if fill else c.stroke)(path, gc)
    return np.rint(c.coverage() * 255).astype(np.uint8)


LINES = [shapely.LineString([(3.3, 5.1), (40.7, 30.2), (60.1, 4.9)]),
         shapely.LineString([(10, 40), (12.5, 10.25), (50, 44)])]
RING = shapely.Polygon([(5, 5), (30, 8), (25, 40), (8, 30)], [[(12, 15), (20, 15), (18, 25)]])


@pytest.mark.parametrize("width", [0.4, 1.0, 2.6, 7.0])
@pytest.mark.parametrize("cap,join", [("round", "round"), ("butt", "miter"),
                                      ("projecting", "bevel")])
def test_strokes_are_the_backends(width, cap, join):
    from compose.layers.paths import line_path

    path = line_path(LINES, T, W, H)
    assert np.array_equal(_ours([(path, width, cap, join, False)]),
                          _reference([(path, width, cap, join, False)]))


@pytest.mark.parametrize("width", [0.0, 1.5])
def test_fills_are_the_backends(width):
    from compose.layers.paths import area_path

    path = area_path([RING], T, W, H)
    assert np.array_equal(_ours([(path, width, "round", "round", True)]),
                          _reference([(path, width, "round", "round", True)]))


@pytest.mark.parametrize("text,size", [("Harbour", 7.0), ("Río Verde", 6.5), ("Wg", 13.0),
                                       ("1,024 m", 9.25)])
def test_text_boxes_are_the_backends(text, size):
    from matplotlib.backends.backend_agg import RendererAgg
    from matplotlib.font_manager import FontProperties

    prop = FontProperties(family="DejaVu Sans", size=size)
    assert draw._text_extent(text, prop) == RendererAgg(1, 1, 72.0).get_text_width_height_descent(
        text, prop, False)


def test_drawing_loads_no_matplotlib_backend():
    code = ("import sys, compose.layers.draw as d, shapely\n"
            "d.draw_lines([shapely.LineString([(0, 0), (5, 5)])], d.Affine.identity(), 8, 8, "
            "width_px=1.0)\nd.measure_text('Town', 7.0)\n"
            "print(' '.join(sorted(sys.modules)))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    loaded = set(out.stdout.split())
    assert "matplotlib.backends._backend_agg" in loaded
    assert not loaded & {"matplotlib.backend_bases", "matplotlib.backends.backend_agg",
                         "matplotlib.figure", "matplotlib.widgets"}


@pytest.mark.parametrize("text,size", [("Harbour", 7.0), ("Río Verde", 6.5), ("Wg", 13.0),
                                       ("1,024 m", 9.25), ("cost \\$5", 8.0), ("$x^2$", 9.0)])
def test_text_outlines_are_textpaths(text, size):
    """Glyph outlines as matplotlib's TextPath gives them (mathtext through TextPath itself)."""
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextPath

    prop = FontProperties(family="DejaVu Sans", size=size)
    vertices, codes = draw.text_outline(text, size, prop)
    tp = TextPath((0.0, 0.0), text, size=size, prop=prop)
    assert np.array_equal(vertices, np.asarray(tp.vertices, np.float64))
    assert np.array_equal(codes, tp.codes)


@pytest.mark.parametrize("r", [0.5, 1.0, 2.75, 10.0 / 3.0, 7.1])
def test_circle_markers_are_matplotlibs_circle(r):
    """A circle marker is matplotlib's Path.circle point for point (drawn without importing
    matplotlib's package: compose.layers.draw._circle)."""
    from matplotlib.path import Path as Curves

    ours, ref = draw._circle(r), Curves.circle((0.0, 0.0), r)
    assert ours.vertices.tobytes() == np.asarray(ref.vertices, np.float64).tobytes()
    assert ours.codes.tobytes() == np.asarray(ref.codes, np.uint8).tobytes()


def test_plain_labels_load_no_matplotlib_artists():
    code = ("import sys, compose.layers.draw as d\nd.measure_text('Río Verde', 7.0)\n"
            "print(' '.join(sorted(sys.modules)))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert not set(out.stdout.split()) & {"matplotlib.text", "matplotlib.patches",
                                          "matplotlib.lines"}


FIRST_USE = r"""
import sys, threading
from compose.layers import draw
shape = draw.measure_text("Harbour", 12.0)      # matplotlib imported, as label placement does
barrier = threading.Barrier(8)
errors = []
def worker(k):
    try:
        barrier.wait()                          # every thread meets the renderer at once
        draw.draw_text_shapes([(shape, 3.0 + k, 20.0)], 64, 32, halo_px=2.0)
    except Exception as exc:
        errors.append(repr(exc))
threads = [threading.Thread(target=worker, args=(k,)) for k in range(8)]
for t in threads: t.start()
for t in threads: t.join()
print(errors[0] if errors else "ok")
"""


def test_threads_meeting_the_renderer_first_at_once_all_draw():
    # Window threads drawing their first labels at the same moment sometimes broke the
    # renderer's buffer protocol for the whole process (BufferError "pybind11_getbuffer():
    # Internal error", a render failing). The first use happens in a fresh process only, so
    # several are started; before renderer_class's lock about half of them failed.
    for _ in range(6):
        res = subprocess.run([sys.executable, "-c", FIRST_USE], capture_output=True, text=True,
                             timeout=120)
        assert res.returncode == 0, res.stderr[-2000:]
        assert res.stdout.strip() == "ok"
