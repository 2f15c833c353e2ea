"""Antialiased vector drawing into coverage rasters with matplotlib's Agg renderer.

Every function draws shapely geometries (already in the grid's CRS) onto a grid given by an
affine ``transform`` (pixel -> CRS), ``width`` and ``height`` and returns *coverage*: float32
(H, W) in [0, 1], the fraction of each pixel the ink covers (Agg's 8-bit coverage / 255). Colour
is applied later by the caller, one colour per part (stroke, fill, halo), so one geometry set
gives one coverage plane per part.

Geometry is exact: a CRS point lands where the inverse affine puts it, pixel (col, row) covering
[col, col + 1) x [row, row + 1) with its centre at +0.5; no snapping, no path simplification, no
margins. The renderer runs at 72 dpi so its "points" are pixels. All geometries of one call
become a single compound path (built in bulk from ``shapely.get_coordinates``), so overlapping
features merge into one coverage (non-zero winding) instead of darkening where they cross.

Windows: draw each window with its own transform (``Canvas.window_transform``) and a margin at
least half the widest stroke; the cores then join without seams. Dash patterns restart at every
part's first vertex, so for dashed lines pass geometries clipped to the canvas (or the window
padded by more than a dash period), not cut at the window edge; Agg clips strokes itself.
"""
from __future__ import annotations

import functools
from dataclasses import dataclass, field
from typing import Iterable, Sequence

import numpy as np
import shapely
from affine import Affine
from matplotlib.backends.backend_agg import RendererAgg
from matplotlib.font_manager import FontProperties, findfont
from matplotlib.path import Path
from matplotlib.textpath import TextPath
from matplotlib.transforms import IdentityTransform

from compose.errors import StyleError

__all__ = ["CAPS", "JOINS", "SHAPES", "ANCHORS", "TextShape", "measure_text", "to_pixels",
           "draw_lines", "draw_areas", "draw_points", "draw_texts", "draw_text_shapes"]

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
_MULTI = (4, 5, 6, 7)   # shapely type ids of Multi* and GeometryCollection


def _choice(value: str, options, what: str) -> str:
    if value not in options:
        raise StyleError(f"{value!r} is not a {what}; one of: {', '.join(options)}")
    return options[value] if isinstance(options, dict) else value


def to_pixels(xy: np.ndarray, transform: Affine) -> np.ndarray:
    """CRS coordinates (N, 2) -> fractional pixel (col, row), float64; pixel centres at +0.5."""
    inv = ~transform
    xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
    out = np.empty_like(xy)
    out[:, 0] = inv.a * xy[:, 0] + inv.b * xy[:, 1] + inv.c
    out[:, 1] = inv.d * xy[:, 0] + inv.e * xy[:, 1] + inv.f
    return out


def _display(xy: np.ndarray, transform: Affine, height: int) -> np.ndarray:
    """CRS -> Agg display coordinates (x right, y up from the bottom edge), in pixels."""
    px = to_pixels(xy, transform)
    px[:, 1] = height - px[:, 1]
    return px


def _parts(geoms) -> np.ndarray:
    """Flatten Multi* and collections into single-part geometries (empty and None dropped)."""
    g = np.asarray(geoms if not isinstance(geoms, shapely.Geometry) else [geoms], dtype=object)
    g = g[~shapely.is_missing(g)] if g.size else g
    while g.size and np.isin(shapely.get_type_id(g), _MULTI).any():
        g = shapely.get_parts(g)
    return g[~shapely.is_empty(g)] if g.size else g


def _start_outside(disp: np.ndarray, first: np.ndarray, width: int, height: int) -> np.ndarray:
    """Rotate each closed ring to start at a vertex outside the renderer's clip box, if it has one.

    Agg's stroke clipping (matplotlib cuts strokes at 1 px beyond the raster) breaks a ring that
    leaves the raster into pieces; where the ring's start vertex lies inside, the two pieces
    meeting there overlap and their antialiased edges add up, which differs from window to
    window. Starting outside moves that break off the raster. Rings are closed (last == first).
    """
    x, y = disp[:, 0], disp[:, 1]
    outside = (x < -1.0) | (x > width + 1.0) | (y < -1.0) | (y > height + 1.0)
    starts = np.flatnonzero(first)
    lengths = np.diff(np.append(starts, len(disp)))
    core = np.maximum(lengths - 1, 1)               # vertices without the closing duplicate
    s_rep = np.repeat(starts, lengths)
    m_rep = np.repeat(core, lengths)
    pos = np.arange(len(disp)) - s_rep
    big = np.iinfo(np.int64).max
    cand = np.where(outside & (pos < m_rep), pos, big)
    k = np.minimum.reduceat(cand, starts)
    k[k == big] = 0
    if not k.any():
        return disp
    k_rep = np.repeat(k, lengths)
    src = s_rep + np.where(pos < m_rep, (pos + k_rep) % m_rep, k_rep)
    return disp[src]


def _path(xy: np.ndarray, index: np.ndarray, transform: Affine, width: int, height: int,
          closed: bool, rotate: bool = False) -> Path | None:
    """One compound Path: MOVETO at the first vertex of every part, CLOSEPOLY at rings' last."""
    if len(xy) == 0:
        return None
    codes = np.full(len(xy), Path.LINETO, dtype=Path.code_type)
    first = np.ones(len(xy), dtype=bool)
    first[1:] = index[1:] != index[:-1]
    codes[first] = Path.MOVETO
    disp = _display(xy, transform, height)
    if closed:
        last = np.roll(first, -1)
        codes[last & ~first] = Path.CLOSEPOLY
        if rotate:
            disp = _start_outside(disp, first, width, height)
    path = Path(disp, codes, readonly=True)
    path.should_simplify = False   # exact geometry, and identical in every window
    return path


def _line_path(geoms, transform: Affine, width: int, height: int,
               rotate: bool = True) -> Path | None:
    """Lines, rings and polygon boundaries as one open/closed compound path.

    rotate: start rings outside the raster where possible (see :func:`_start_outside`); off
    for dashing, where the pattern must start at the ring's own first vertex in every window.
    """
    parts = _parts(geoms)
    if parts.size == 0:
        return None
    kind = shapely.get_type_id(parts)
    rings = parts[kind == 3]
    if rings.size:
        parts = np.concatenate([parts[kind != 3], shapely.get_rings(rings)])
        kind = shapely.get_type_id(parts)
    lines = parts[kind == 1]
    closed = parts[kind == 2]
    paths = []
    for sel, is_closed in ((lines, False), (closed, True)):
        if sel.size:
            xy, idx = shapely.get_coordinates(sel, return_index=True)
            paths.append(_path(xy, idx, transform, width, height, is_closed, rotate))
    paths = [p for p in paths if p is not None]
    if not paths:
        return None
    return paths[0] if len(paths) == 1 else _concat(paths)


def _concat(paths: Sequence[Path]) -> Path:
    path = Path(np.concatenate([p.vertices for p in paths]),
                np.concatenate([p.codes for p in paths]), readonly=True)
    path.should_simplify = False
    return path


def _area_path(geoms, transform: Affine, width: int, height: int) -> Path | None:
    """Polygons with exteriors and holes wound opposite ways, so non-zero filling cuts holes."""
    parts = _parts(geoms)
    if parts.size == 0:
        return None
    polys = parts[shapely.get_type_id(parts) == 3]
    if polys.size == 0:
        return None
    polys = shapely.orient_polygons(polys, exterior_cw=False)
    xy, idx = shapely.get_coordinates(shapely.get_rings(polys), return_index=True)
    return _path(xy, idx, transform, width, height, closed=True)


def _dashed(path: Path, dash_px: Sequence[float]) -> Path | None:
    """Cut a polyline path (MOVETO / LINETO / CLOSEPOLY) into its "on" dashes, in numpy.

    The pattern starts "on" at every part's first vertex and runs along the part's length in
    pixels. Dashing here rather than in Agg keeps dashes identical in every window: Agg dashes
    after clipping the path to the raster, which restarts the pattern where a line re-enters.
    """
    pattern = np.asarray([float(d) for d in dash_px])
    if len(pattern) % 2 or pattern.min() < 0 or pattern.sum() <= 0:
        raise StyleError(f"dash: need pairs of on/off lengths >= 0, got {list(dash_px)}")
    period = float(pattern.sum())
    starts_b = np.concatenate([[0.0], np.cumsum(pattern)[:-1]])   # start of each element
    v, codes = path.vertices, path.codes
    closing = codes == Path.CLOSEPOLY
    if closing.any():   # a ring closes back to its MOVETO vertex
        first_idx = np.maximum.accumulate(np.where(codes == Path.MOVETO, np.arange(len(v)), 0))
        v = v.copy()
        v[closing] = v[first_idx[closing]]
    first = codes == Path.MOVETO
    part = np.cumsum(first) - 1
    seg = np.diff(v, axis=0)
    seglen = np.hypot(seg[:, 0], seg[:, 1])
    seglen[first[1:]] = 0.0
    s = np.concatenate([[0.0], np.cumsum(seglen)])
    part_s0 = s[first]
    local = s - part_s0[part]
    ends = np.append(np.flatnonzero(first)[1:], len(v)) - 1
    length = local[ends]
    # pattern boundaries t = m * period + start of element j, 0 < t < part length
    reps = np.ceil(length / period).astype(np.int64) * len(pattern)
    b_part = np.repeat(np.arange(len(length)), reps)
    k = np.arange(len(b_part)) - np.repeat(np.cumsum(reps) - reps, reps)
    b_elem = k % len(pattern)
    b_t = (k // len(pattern)) * period + starts_b[b_elem]
    keep = (b_t > 0) & (b_t < length[b_part])
    b_part, b_elem, b_t = b_part[keep], b_elem[keep], b_t[keep]
    # where boundaries fall: the segment of their part that contains them
    g = part_s0[b_part] + b_t
    i = np.clip(np.searchsorted(s, g, side="right") - 1, np.flatnonzero(first)[b_part],
                ends[b_part] - 1)
    frac = np.divide(g - s[i], seglen[i], out=np.zeros_like(g), where=seglen[i] > 0)
    b_xy = v[i] + frac[:, None] * seg[i]
    v_elem = np.searchsorted(starts_b, np.mod(local, period), side="right") - 1
    # events of vertices and boundaries in order along each part (vertices first on ties)
    ev_part = np.concatenate([part, b_part])
    ev_t = np.concatenate([local, b_t])
    ev_kind = np.concatenate([np.zeros(len(v), np.int8), np.ones(len(b_t), np.int8)])
    order = np.lexsort((ev_kind, ev_t, ev_part))
    ev_xy = np.concatenate([v, b_xy])[order]
    on_after = (np.concatenate([v_elem, b_elem]) % 2 == 0)[order]
    ev_part = ev_part[order]
    new_part = np.ones(len(order), dtype=bool)
    new_part[1:] = ev_part[1:] != ev_part[:-1]
    on_before = np.zeros(len(order), dtype=bool)
    on_before[1:] = on_after[:-1]
    on_before[new_part] = False
    last = np.append(new_part[1:], True)
    on_after = on_after & ~last
    keep = on_before | on_after
    if not keep.any():
        return None
    out_codes = np.where(on_before, Path.LINETO, Path.MOVETO).astype(Path.code_type)[keep]
    out = Path(ev_xy[keep], out_codes, readonly=True)
    out.should_simplify = False
    return out


class _Canvas:
    """An Agg renderer with one graphics context: black, opaque, antialiased, unsnapped."""

    def __init__(self, width: int, height: int):
        if width < 1 or height < 1:
            raise ValueError(f"grid must be at least 1 x 1, got {width} x {height}")
        self.width, self.height = int(width), int(height)
        self.renderer = RendererAgg(self.width, self.height, _DPI)

    def gc(self, width_px: float = 0.0, cap: str = "round", join: str = "round"):
        gc = self.renderer.new_gc()
        gc.set_antialiased(True)
        gc.set_snap(False)
        gc.set_foreground((0.0, 0.0, 0.0, 1.0))
        gc.set_linewidth(float(width_px))
        gc.set_capstyle(_choice(cap, CAPS, "line cap"))
        gc.set_joinstyle(_choice(join, JOINS, "line join"))
        return gc

    def stroke(self, path: Path, gc) -> None:
        self.renderer.draw_path(gc, path, IdentityTransform())

    def fill(self, path: Path, gc) -> None:
        self.renderer.draw_path(gc, path, IdentityTransform(), (0.0, 0.0, 0.0, 1.0))

    def coverage(self) -> np.ndarray:
        alpha = np.asarray(self.renderer.buffer_rgba())[..., 3]
        return np.divide(alpha, np.float32(255.0), dtype=np.float32)

    def clear(self) -> None:
        self.renderer.clear()


def _zeros(width: int, height: int) -> np.ndarray:
    return np.zeros((int(height), int(width)), np.float32)


def draw_lines(geoms, transform: Affine, width: int, height: int, *, width_px: float,
               dash_px: Sequence[float] | None = None, cap: str = "round",
               join: str = "round") -> np.ndarray:
    """Stroke lines (also rings and polygon boundaries); coverage float32 (H, W) in [0, 1].

    width_px: stroke width in pixels (under 1 px still draws, fainter); dash_px: on/off lengths
    in pixels, starting "on" at each part's first vertex; cap: round | butt | square;
    join: round | miter | bevel. A halo is this same call with the halo's (total) width,
    composited beneath the stroke.
    """
    canvas = _Canvas(width, height)
    path = _line_path(geoms, transform, canvas.width, canvas.height, rotate=not dash_px)
    if path is None or not width_px > 0:
        return _zeros(width, height)
    if dash_px:
        path = _dashed(path, dash_px)
        if path is None:
            return _zeros(width, height)
    canvas.stroke(path, canvas.gc(width_px, cap, join))
    return canvas.coverage()


def draw_areas(geoms, transform: Affine, width: int, height: int, *, fill: bool = True,
               stroke_width_px: float = 0.0, dash_px: Sequence[float] | None = None,
               join: str = "round") -> tuple[np.ndarray | None, np.ndarray | None]:
    """Fill polygons and/or stroke their boundaries.

    Returns (fill coverage, outline coverage), float32 (H, W) in [0, 1] each, or None for a part
    not asked for (``fill=False``, ``stroke_width_px=0``). The outline is centred on the boundary.
    """
    canvas = _Canvas(width, height)
    fill_cov = stroke_cov = None
    if fill:
        path = _area_path(geoms, transform, canvas.width, canvas.height)
        if path is None:
            fill_cov = _zeros(width, height)
        else:
            canvas.fill(path, canvas.gc(0.0))
            fill_cov = canvas.coverage()
    if stroke_width_px > 0:
        canvas.clear()
        path = _line_path(geoms, transform, canvas.width, canvas.height, rotate=not dash_px)
        if path is not None and dash_px:
            path = _dashed(path, dash_px)
        if path is None:
            stroke_cov = _zeros(width, height)
        else:
            canvas.stroke(path, canvas.gc(stroke_width_px, "round", join))
            stroke_cov = canvas.coverage()
    return fill_cov, stroke_cov


def _marker(shape: str, size_px: float) -> Path:
    r = size_px / 2.0
    if _choice(shape, SHAPES, "point shape") == "circle":
        return Path.circle((0.0, 0.0), r)
    return Path(np.array([[-r, -r], [r, -r], [r, r], [-r, r], [-r, -r]]),
                [Path.MOVETO, Path.LINETO, Path.LINETO, Path.LINETO, Path.CLOSEPOLY])


def draw_points(points, transform: Affine, width: int, height: int, *, size_px: float,
                shape: str = "circle", stroke_width_px: float = 0.0
                ) -> tuple[np.ndarray, np.ndarray | None]:
    """Markers of diameter (circle) or side (square) ``size_px`` centred on each point.

    points: shapely (Multi)Points or an (N, 2) array of CRS coordinates.
    Returns (fill coverage, outline coverage or None when ``stroke_width_px`` is 0).
    """
    marker = _marker(shape, float(size_px))
    if isinstance(points, np.ndarray) and points.dtype != object:
        xy = points.reshape(-1, 2).astype(np.float64)
    else:
        xy = shapely.get_coordinates(_parts(points))
    canvas = _Canvas(width, height)
    centres = _display(xy, transform, canvas.height)
    reach = size_px / 2.0 + stroke_width_px + 1.0
    keep = ((centres[:, 0] > -reach) & (centres[:, 0] < canvas.width + reach)
            & (centres[:, 1] > -reach) & (centres[:, 1] < canvas.height + reach))
    centres = centres[keep]
    if len(centres) == 0 or not size_px > 0:
        return _zeros(width, height), (_zeros(width, height) if stroke_width_px > 0 else None)
    verts = (marker.vertices[None, :, :] + centres[:, None, :]).reshape(-1, 2)
    path = Path(verts, np.tile(marker.codes, len(centres)), readonly=True)
    path.should_simplify = False
    canvas.fill(path, canvas.gc(0.0))
    fill_cov = canvas.coverage()
    stroke_cov = None
    if stroke_width_px > 0:
        canvas.clear()
        canvas.stroke(path, canvas.gc(stroke_width_px))
        stroke_cov = canvas.coverage()
    return fill_cov, stroke_cov


# --- text ---------------------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class TextShape:
    """A text's outline at a size, with its box (pixels): origin at the baseline's left end.

    width: box width; ascent/descent: box extent above/below the baseline (>= 0). The box is the
    Agg renderer's text extent (``get_text_width_height_descent``) widened to the outline's own
    extent where hinting made the former smaller, so the drawn ink never leaves it.
    vertices (N, 2) / codes (N,): the glyph outlines, y up, in pixels.
    """

    text: str
    width: float
    ascent: float
    descent: float
    vertices: np.ndarray = field(compare=False, repr=False)
    codes: np.ndarray = field(compare=False, repr=False)

    @property
    def height(self) -> float:
        return self.ascent + self.descent


@functools.lru_cache(maxsize=4096)
def measure_text(text: str, size_px: float, font: str = "DejaVu Sans",
                 weight: str = "normal") -> TextShape:
    """Outline and box of ``text`` at ``size_px`` pixels (the font size in px at 72 dpi)."""
    prop = FontProperties(family=font, weight=weight, size=float(size_px))
    try:
        findfont(prop, fallback_to_default=False)
    except ValueError:
        raise StyleError(f"font {font!r} (weight {weight!r}) not found") from None
    w, h, d = _measurer().get_text_width_height_descent(text, prop, False)
    tp = TextPath((0.0, 0.0), text, size=float(size_px), prop=prop)
    v = np.asarray(tp.vertices, np.float64)
    codes = tp.codes if tp.codes is not None else np.full(len(v), Path.LINETO, Path.code_type)
    if len(v):
        w = max(w, float(v[:, 0].max()))
        asc = max(h - d, float(v[:, 1].max()))
        d = max(d, -float(v[:, 1].min()))
    else:
        asc = h - d
    v.setflags(write=False)
    return TextShape(text, float(w), float(asc), float(d), v, np.asarray(codes))


@functools.lru_cache(maxsize=1)
def _measurer() -> RendererAgg:
    return RendererAgg(1, 1, _DPI)


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
    canvas = _Canvas(width, height)
    path = Path(np.concatenate(verts), np.concatenate(codes), readonly=True)
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
    placed = []
    for item in items:
        x, y, text = item[:3]
        fx, fy = _choice(item[3] if len(item) > 3 else "center", ANCHORS, "text anchor")
        shape = measure_text(str(text), size_px, font, weight)
        col, row = to_pixels(np.array([[x, y]]), transform)[0]
        placed.append((shape, col - fx * shape.width, row + fy * shape.height))
    return draw_text_shapes(placed, width, height, halo_px)
