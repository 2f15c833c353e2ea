"""Antialiased vector drawing into coverage rasters with matplotlib's Agg renderer.

Every function draws shapely geometries (already in the grid's CRS) onto a grid given by an
affine ``transform`` (pixel -> CRS), ``width`` and ``height`` and returns *coverage*: float32
(H, W) in [0, 1], the fraction of each pixel the ink covers (Agg's 8-bit coverage / 255). Colour
is applied later by the caller, one colour per part (stroke, fill, halo), so one geometry set
gives one coverage plane per part.

Geometry is exact: a CRS point lands where the inverse affine puts it, pixel (col, row) covering
[col, col + 1) x [row, row + 1) with its centre at +0.5; no snapping, no path simplification, no
margins. The renderer runs at 72 dpi so its "points" are pixels. All geometries of one call
become a single compound path (built in bulk by :mod:`compose.layers.paths`), filled with the
non-zero rule, so overlapping features do not darken each other's interiors (antialiased edge
pixels where two features overlap do add up, clamped at 1).

Windows: draw each window with its own transform (``Canvas.window_transform``) and a margin of
at least half the widest stroke plus 2 px (Agg cuts strokes 1 px beyond the raster; miter joins
at sharp angles reach further than half the width); the cores then join without visible seams
(tested to 1/255 on sparse lines; where a path that Agg cut at the raster edge turns sharply
near it, its inner join changes, so dense lines move by more at a few pixels). The vector
layers therefore draw fixed tiles of the canvas, whose pixels do not depend on the window size
(:data:`compose.layers.vector.TILE`). Dashes are cut in numpy along each part from its first
vertex, before Agg sees the path, so they agree across windows as long as every window gets the
same parts: pass dashed lines clipped to the canvas (or not at all), not cut at the window edge.
"""
from __future__ import annotations

import threading
from collections.abc import Iterable, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import shapely
from affine import Affine

from compose.errors import StyleError
from compose.layers.agg import Path, renderer_class
from compose.layers.paths import area_path, dashed, display, flatten, line_path, to_pixels

if TYPE_CHECKING:
    from matplotlib.font_manager import FontProperties

    from compose.layers.label_text import TextShape, measure_text


def __getattr__(name: str) -> Any:
    """``TextShape`` and ``measure_text`` of :mod:`compose.layers.label_text`, imported on first
    use: lines, areas and points never need it (nor the modules it loads: tempfile and more,
    about 4 ms of a draft's marks process)."""
    if name in ("TextShape", "measure_text"):
        from compose.layers import label_text

        return getattr(label_text, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")

__all__ = ["CAPS", "JOINS", "SHAPES", "ANCHORS", "TextShape", "measure_text", "to_pixels",
           "draw_lines", "stroke_path", "draw_areas", "draw_points", "draw_texts", "draw_text_shapes",
           "fill_text_path", "eight_bit_coverage", "text_outline"]

#: Line end styles (our names -> Agg's).
CAPS = {"round": "round", "butt": "butt", "square": "projecting"}
#: Line join styles.
JOINS = {"round": "round", "miter": "miter", "bevel": "bevel"}
#: Point marker shapes.
SHAPES = ("circle", "square")
#: Anchor name -> (fx, fy): the point sits at fraction fx of the text box from its left and fy
#: from its bottom.
ANCHORS = {
    "lower left": (0.0, 0.0), "left": (0.0, 0.5), "upper left": (0.0, 1.0),
    "bottom": (0.5, 0.0), "center": (0.5, 0.5), "top": (0.5, 1.0),
    "lower right": (1.0, 0.0), "right": (1.0, 0.5), "upper right": (1.0, 1.0),
}
_DPI = 72.0   # 1 pt == 1 px in the renderer
_EIGHT_BIT = False


def eight_bit_coverage(on: bool = True) -> None:
    """From now on (in this process) every draw function returns Agg's own 8-bit coverage,
    uint8 k meaning k / 255, instead of float32: for a process that only hands coverage on
    (:mod:`compose.drawer`'s helper), which then skips the float32 copy and its way back."""
    global _EIGHT_BIT
    _EIGHT_BIT = bool(on)


def _choice(value: str, options, what: str) -> str:
    if value not in options:
        raise StyleError(f"{value!r} is not a {what}; one of: {', '.join(options)}")
    return options[value] if isinstance(options, dict) else value


class _GC:
    """The graphics context Agg's C++ renderer reads (the attributes and getters of matplotlib's
    ``GraphicsContextBase`` it takes, with that class's defaults): black, opaque, no clip, no
    dashes, hatch or sketch. Drawing through matplotlib's C++ renderer directly, not its Python
    backend, keeps matplotlib itself out of the import (:mod:`compose.layers.agg`); cap and join
    are the names Agg's cap and join styles are read from."""

    def __init__(self, width_px: float, cap: str, join: str):
        self._alpha = 1.0
        self._forced_alpha = False
        self._antialiased = 1
        self._capstyle = cap
        self._joinstyle = join
        self._cliprect = None
        self._dashes = 0, None
        self._linewidth = float(width_px)
        self._rgb = (0.0, 0.0, 0.0, 1.0)
        self._hatch_color = None
        self._hatch_linewidth = 1.0         # matplotlib's default (no hatch is drawn)
        self._snap = False
        self._sketch = None

    def get_dashes(self):
        return self._dashes

    def get_clip_path(self):
        return None, None

    def get_snap(self):
        return self._snap

    def get_hatch_path(self, density: float = 6.0):
        return None

    def get_hatch_color(self):
        return self._hatch_color

    def get_hatch_linewidth(self):
        return self._hatch_linewidth

    def get_sketch_params(self):
        return self._sketch


#: Renderers kept per thread for reuse, at most this many sizes (the vector layers' tiles are
#: all one size but at the canvas's edges; labels draw padded windows).
KEPT_RENDERERS = 4
#: Largest renderer kept (pixels): a tile or a window. A renderer keeps the cell storage its
#: biggest drawing needed (Agg's rasterizer reuses its blocks, up to 64 MB), so one that drew a
#: whole large raster in one go is let go with its memory.
KEPT_PIXELS = 1 << 20
_KEPT = threading.local()


def _renderer(width: int, height: int):
    """An Agg renderer of ``width`` x ``height``, cleared: this thread's last one of that size
    if it has one (a renderer's pixel buffer, scanline storage and cell blocks are allocated,
    and their pages faulted in, when it is made: making one per 256 px tile of the 8192
    benchmark's lines was about a tenth of the drawing helper's CPU; measured, no source). A
    cleared renderer draws the same bytes as a new one (tests/layers/test_draw.py)."""
    if width * height > KEPT_PIXELS:
        return renderer_class()(width, height, _DPI)
    kept = getattr(_KEPT, "renderers", None)
    if kept is None:
        kept = _KEPT.renderers = {}
    key = (width, height)
    renderer = kept.pop(key, None)
    if renderer is None:
        renderer = renderer_class()(width, height, _DPI)
        if len(kept) >= KEPT_RENDERERS:
            del kept[next(iter(kept))]          # the one used longest ago
    else:
        renderer.clear()
    kept[key] = renderer                        # the most recently used last
    return renderer


class _Canvas:
    """An Agg renderer with one graphics context: black, opaque, antialiased, unsnapped. The
    renderer is this thread's of that size (:func:`_renderer`): a canvas is used by one call
    and its coverage copied out before the call returns."""

    def __init__(self, width: int, height: int):
        if width < 1 or height < 1:
            raise ValueError(f"grid must be at least 1 x 1, got {width} x {height}")
        self.width, self.height = int(width), int(height)
        self.renderer = _renderer(self.width, self.height)

    def gc(self, width_px: float = 0.0, cap: str = "round", join: str = "round") -> _GC:
        # validates cap and join even when nothing is drawn
        return _GC(width_px, _choice(cap, CAPS, "line cap"), _choice(join, JOINS, "line join"))

    def stroke(self, path: Path, gc: _GC) -> None:
        self.renderer.draw_path(gc, path, None, None)          # None: the identity

    def fill(self, path: Path, gc: _GC) -> None:
        self.renderer.draw_path(gc, path, None, (0.0, 0.0, 0.0, 1.0))

    def coverage(self) -> np.ndarray:
        alpha = np.asarray(memoryview(self.renderer))[..., 3]
        if _EIGHT_BIT:
            return np.ascontiguousarray(alpha)
        return np.divide(alpha, np.float32(255.0), dtype=np.float32)

    def clear(self) -> None:
        self.renderer.clear()


def _zeros(width: int, height: int) -> np.ndarray:
    return np.zeros((int(height), int(width)), np.uint8 if _EIGHT_BIT else np.float32)


def draw_lines(geoms, transform: Affine, width: int, height: int, *, width_px: float,
               dash_px: Sequence[float] | None = None, cap: str = "round",
               join: str = "round", color_rgb=None) -> np.ndarray:
    """Stroke lines (also rings and polygon boundaries); coverage float32 (H, W) in [0, 1].

    width_px: stroke width in pixels (under 1 px still draws, fainter); dash_px: on/off lengths
    in pixels, starting "on" at each part's first vertex; cap: round | butt | square;
    join: round | miter | bevel. A halo is this same call with the halo's (total) width,
    composited beneath the stroke. ``color_rgb`` is accepted and ignored: colour is applied by
    the caller to the returned coverage.
    """
    canvas = _Canvas(width, height)
    gc = canvas.gc(width_px, cap, join)   # validates cap and join even when nothing is drawn
    path = line_path(geoms, transform, canvas.width, canvas.height, rotate=not dash_px)
    if path is not None and dash_px:
        path = dashed(path, dash_px)
    if path is None or not width_px > 0:
        return _zeros(width, height)
    canvas.stroke(path, gc)
    return canvas.coverage()


def stroke_path(path: Path | None, width: int, height: int, widths_px: Sequence[float],
                cap: str = "round", join: str = "round") -> list[np.ndarray]:
    """Stroke one path already in this raster's display space (:mod:`compose.layers.paths`)
    at each of ``widths_px`` in turn: one coverage (H, W) in [0, 1] per width (float32, or
    Agg's uint8 after :func:`eight_bit_coverage`), as :func:`draw_lines` gives it."""
    canvas = _Canvas(width, height)
    out = []
    for i, w in enumerate(widths_px):
        gc = canvas.gc(w, cap, join)
        if path is None or not w > 0:
            out.append(_zeros(width, height))
            continue
        if i:
            canvas.clear()
        canvas.stroke(path, gc)
        out.append(canvas.coverage())
    return out


def draw_areas(geoms, transform: Affine, width: int, height: int, *, fill: bool = True,
               stroke_width_px: float = 0.0, dash_px: Sequence[float] | None = None,
               cap: str = "round", join: str = "round"
               ) -> tuple[np.ndarray | None, np.ndarray | None]:
    """Fill polygons and/or stroke their boundaries.

    Returns (fill coverage, outline coverage), float32 (H, W) in [0, 1] each, or None for a part
    not asked for (``fill=False``, ``stroke_width_px=0``). The outline is centred on the boundary;
    ``cap`` only shows at dash ends.
    """
    canvas = _Canvas(width, height)
    fill_cov = stroke_cov = None
    if fill:
        path = area_path(geoms, transform, canvas.width, canvas.height)
        if path is None:
            fill_cov = _zeros(width, height)
        else:
            canvas.fill(path, canvas.gc(0.0))
            fill_cov = canvas.coverage()
    if stroke_width_px > 0:
        canvas.clear()
        path = line_path(geoms, transform, canvas.width, canvas.height, rotate=not dash_px)
        if path is not None and dash_px:
            path = dashed(path, dash_px)
        if path is None:
            stroke_cov = _zeros(width, height)
        else:
            canvas.stroke(path, canvas.gc(stroke_width_px, cap, join))
            stroke_cov = canvas.coverage()
    return fill_cov, stroke_cov


def _circle(r: float) -> Path:
    """A circle of radius ``r`` around (0, 0) as 8 cubic Bezier arcs, from (0, -r)
    counter-clockwise (Lancaster, "Approximating a Circle or an Ellipse Using Four Bezier Cubic
    Splines": the control points at ``MAGIC`` = 0.2652031 along each arc's end tangents) --
    matplotlib's ``Path.circle``, point for point (tests/layers/test_draw_agg.py)."""
    magic = 0.2652031
    half = np.sqrt(0.5)
    m45 = half * magic
    unit = np.array([[0.0, -1.0],
                     [magic, -1.0], [half - m45, -half - m45], [half, -half],
                     [half + m45, -half + m45], [1.0, -magic], [1.0, 0.0],
                     [1.0, magic], [half + m45, half - m45], [half, half],
                     [half - m45, half + m45], [magic, 1.0], [0.0, 1.0],
                     [-magic, 1.0], [-half + m45, half + m45], [-half, half],
                     [-half - m45, half - m45], [-1.0, magic], [-1.0, 0.0],
                     [-1.0, -magic], [-half - m45, -half + m45], [-half, -half],
                     [-half + m45, -half - m45], [-magic, -1.0], [0.0, -1.0],
                     [0.0, -1.0]], dtype=float)
    codes = [Path.CURVE4] * 26
    codes[0], codes[-1] = Path.MOVETO, Path.CLOSEPOLY
    return Path(unit * r + (0.0, 0.0), codes)


def _marker(shape: str, size_px: float) -> Path:
    r = size_px / 2.0
    if _choice(shape, SHAPES, "point shape") == "circle":
        return _circle(r)
    return Path(np.array([[-r, -r], [r, -r], [r, r], [-r, r], [-r, -r]]),
                [Path.MOVETO, Path.LINETO, Path.LINETO, Path.LINETO, Path.CLOSEPOLY])


def draw_points(points, transform: Affine, width: int, height: int, *, size_px: float,
                shape: str = "circle") -> np.ndarray:
    """Filled markers of diameter (circle) or side (square) ``size_px`` centred on each point.

    points: shapely (Multi)Points or an (N, 2) array of CRS coordinates. Returns coverage float32
    (H, W) in [0, 1]. An outline ring is the same call with a larger size, beneath.
    """
    marker = _marker(shape, float(size_px))
    if isinstance(points, np.ndarray) and points.dtype != object:
        xy = points.reshape(-1, 2).astype(np.float64)
    else:
        xy = shapely.get_coordinates(flatten(points))
    canvas = _Canvas(width, height)
    centres = display(xy, transform, canvas.height)
    reach = size_px / 2.0 + 1.0
    keep = ((centres[:, 0] > -reach) & (centres[:, 0] < canvas.width + reach)
            & (centres[:, 1] > -reach) & (centres[:, 1] < canvas.height + reach))
    centres = centres[keep]
    if len(centres) == 0 or not size_px > 0:
        return _zeros(width, height)
    verts = (marker.vertices[None, :, :] + centres[:, None, :]).reshape(-1, 2)
    path = Path(verts, np.tile(marker.codes, len(centres)), readonly=True)
    path.should_simplify = False
    canvas.fill(path, canvas.gc(0.0))
    return canvas.coverage()


# --- text ---------------------------------------------------------------------------------------

def text_outline(text: str, size_px: float, prop: FontProperties) -> tuple[np.ndarray, np.ndarray]:
    """(vertices (N, 2) float64, a copy; codes) of ``text``'s glyph outlines at ``size_px``, as
    matplotlib's ``TextPath((0, 0), text, size=size_px, prop=prop)`` gives them
    (:func:`compose.layers.label_text.text_outline` for ``prop``'s first family and weight)."""
    from compose.layers import label_text

    return label_text.text_outline(text, float(size_px), prop.get_family()[0], prop.get_weight())


def _text_extent(text: str, prop: FontProperties) -> tuple[float, float, float]:
    """(width, height, descent) in pixels of ``text`` as matplotlib's Agg backend measures it
    (``get_text_width_height_descent`` of plain text at :data:`_DPI`;
    :mod:`compose.layers.label_text`)."""
    from compose.layers import label_text

    return label_text._text_extent(text, float(prop.get_size_in_points()),
                                   label_text.face(prop.get_family()[0], prop.get_weight()))


def draw_text_shapes(shapes: Iterable[tuple[TextShape, float, float]], width: int, height: int,
                     halo_px: float = 0.0) -> tuple[np.ndarray, np.ndarray | None]:
    """Draw text outlines with their box's lower-left corner at pixel (col, row_bottom).

    shapes: (shape, left col, bottom row) in this grid's fractional pixels (row down).
    Returns (text coverage, halo coverage or None when ``halo_px`` is 0). The halo is the glyphs
    filled and stroked ``halo_px`` wide (so it reaches ``halo_px / 2`` beyond the glyph edges).
    """
    verts, codes = [], []
    for shape, left, bottom in shapes:
        if len(shape.vertices) == 0:
            continue
        baseline = height - bottom + shape.descent   # display y of the baseline
        verts.append(shape.vertices + (left, baseline))
        codes.append(shape.codes)
    if not verts:
        return _zeros(width, height), (_zeros(width, height) if halo_px > 0 else None)
    path = Path(np.concatenate(verts), np.concatenate(codes), readonly=True)
    return fill_text_path(path, width, height, halo_px)


def fill_text_path(path: Any, width: int, height: int, halo_px: float = 0.0
                   ) -> tuple[np.ndarray, np.ndarray | None]:
    """Glyph outlines already in display pixels (y up) -> (text coverage, halo coverage or None
    when ``halo_px`` is 0): the glyphs filled, and filled and stroked ``halo_px`` wide. ``path``:
    a :class:`compose.layers.agg.Path` or matplotlib's (Agg reads the same attributes)."""
    canvas = _Canvas(width, height)
    path.should_simplify = False
    canvas.fill(path, canvas.gc(0.0))
    text_cov = canvas.coverage()
    halo_cov = None
    if halo_px > 0:
        canvas.clear()
        canvas.fill(path, canvas.gc(halo_px))
        halo_cov = canvas.coverage()
    return text_cov, halo_cov


def draw_texts(items, transform: Affine, width: int, height: int, *, size_px: float,
               font: str = "DejaVu Sans", weight: str = "normal", halo_px: float = 0.0
               ) -> tuple[np.ndarray, np.ndarray | None]:
    """Draw texts at CRS points: items are (x, y, text) or (x, y, text, anchor).

    anchor (default "center", see :data:`ANCHORS`) names the point of the text box placed at
    (x, y). Returns (text coverage, halo coverage or None when ``halo_px`` is 0).
    """
    from compose.layers.label_text import measure_text

    placed = []
    for item in items:
        x, y, text = item[:3]
        fx, fy = _choice(item[3] if len(item) > 3 else "center", ANCHORS, "text anchor")
        shape = measure_text(str(text), size_px, font, weight)
        col, row = to_pixels(np.array([[x, y]]), transform)[0]
        placed.append((shape, col - fx * shape.width, row + fy * shape.height))
    return draw_text_shapes(placed, width, height, halo_px)
