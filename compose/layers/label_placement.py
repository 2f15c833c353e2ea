"""Point labels: greedy placement on the whole canvas, drawing per window.

Placement runs once for the whole canvas so that every window agrees on which labels exist and
where; each window then draws the placed labels whose box meets it (:func:`draw_labels`).

Rule (common practice, no source): labels go in order of decreasing priority (ties keep input
order). Each tries the candidate positions of :data:`POSITIONS` in turn, its text box offset
``offset_px`` from the point (on both axes for the diagonal positions); the first position whose
box, grown by half the halo width on every side, stays inside the canvas and overlaps no placed
box wins. A label with no such position is not placed.

Line features to keep off (common cartographic practice, no source: a name set across a road or
a river is hard to read and hides the feature): with ``avoid`` lines, a label takes the first
free position (in :data:`POSITIONS` order) whose grown box crosses none of them; when every free
position crosses one, the free position whose box holds the least length of them (ties: the
earlier position). Without ``avoid`` the rule above is unchanged.

Area labels (common practice, no source): an item with an ``area`` (a polygon in CRS units) is
tried first centred on the area's pole of inaccessibility (the inside point farthest from the
edge, :func:`area_anchor`, shapely's polylabel), where its box must lie inside the polygon; when
it does not fit there it falls back to the point positions around that pole.
"""
from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np
from affine import Affine

from compose.layers.draw import ANCHORS, draw_text_shapes, to_pixels
from compose.layers.label_text import TextShape, measure_text

__all__ = ["POSITIONS", "LabelItem", "PlacedLabel", "Placement", "BoxGrid", "LinesToAvoid",
           "place_labels", "draw_labels", "area_anchor"]

#: Candidate positions in order of preference: (name, anchor of the text box at the offset
#: point, (dx, dy) unit offset in pixels with rows running down).
POSITIONS: tuple[tuple[str, str, tuple[int, int]], ...] = (
    ("upper right", "lower left", (1, -1)),
    ("right", "left", (1, 0)),
    ("upper left", "lower right", (-1, -1)),
    ("lower right", "upper left", (1, 1)),
    ("left", "right", (-1, 0)),
    ("lower left", "upper right", (-1, 1)),
    ("above", "bottom", (0, -1)),
    ("below", "top", (0, 1)),
)
_CELL = 64.0   # pixels per cell of the collision grid
_PIECE = 32    # most segments of one piece of a line to avoid (a box's query meets few)


@dataclass(frozen=True, slots=True)
class LabelItem:
    """A label to place: point (x, y) in CRS units, its text and priority (larger goes first)."""

    x: float
    y: float
    text: str
    priority: float = 0.0
    area: object = field(default=None, compare=False, repr=False)   # a shapely polygon, or None


@dataclass(frozen=True, slots=True)
class PlacedLabel:
    """A placed label, in canvas pixels (fractional, rows down).

    x, y: the labelled point in CRS units; position: a name from :data:`POSITIONS`;
    anchor: the text box's point at (col, row), the point moved by the offset;
    box: (col0, row0, col1, row1) of the text box grown by half the halo width.
    """

    text: str
    x: float
    y: float
    priority: float
    position: str
    anchor: str
    col: float
    row: float
    box: tuple[float, float, float, float]
    shape: TextShape = field(compare=False, repr=False)


@dataclass(frozen=True, slots=True)
class Placement:
    """The outcome of :func:`place_labels` and what :func:`draw_labels` needs."""

    placed: tuple[PlacedLabel, ...]      # in placement (priority) order
    unplaced: tuple[LabelItem, ...]      # labels that found no position, in priority order
    transform: Affine
    width: int
    height: int
    halo_px: float


class BoxGrid:
    """Boxes bucketed in square cells, for overlap tests against the placed ones."""

    def __init__(self) -> None:
        self.cells: dict[tuple[int, int], list[tuple[float, float, float, float]]] = {}

    def _keys(self, box):
        c0, r0, c1, r1 = (int(math.floor(v / _CELL)) for v in box)
        return [(i, j) for i in range(c0, c1 + 1) for j in range(r0, r1 + 1)]

    def hits(self, box) -> bool:
        c0, r0, c1, r1 = box
        for key in self._keys(box):
            for b in self.cells.get(key, ()):
                if c0 < b[2] and b[0] < c1 and r0 < b[3] and b[1] < r1:
                    return True
        return False

    def add(self, box) -> None:
        for key in self._keys(box):
            self.cells.setdefault(key, []).append(box)


class LinesToAvoid:
    """Line features labels keep off, in canvas pixels (rows down), cut into pieces of at most
    :data:`_PIECE` segments under an STRtree, so a box's query clips only the pieces near it.

    geometries: shapely lines (or polygons: their outlines; points are ignored) in the CRS of
    ``transform``, the canvas's (CRS -> pixels by its inverse)."""

    def __init__(self, geometries, transform: Affine) -> None:
        import shapely

        geoms = np.asarray(list(geometries), dtype=object).reshape(-1)
        if len(geoms):
            geoms = shapely.get_parts(geoms)
            polys = shapely.get_type_id(geoms) == 3
            if polys.any():                                      # areas: their outlines
                geoms = np.concatenate([geoms[~polys],
                                        shapely.get_parts(shapely.boundary(geoms[polys]))])
            geoms = geoms[np.isin(shapely.get_type_id(geoms), (1, 2))]   # (Multi)LineString parts
        self.pieces = _pieces(geoms, transform)
        self.tree = shapely.STRtree(self.pieces)

    def __len__(self) -> int:
        return len(self.pieces)

    def crossed(self, box) -> float:
        """Length in pixels of the lines inside ``box`` (col0, row0, col1, row1); 0 when none."""
        import shapely

        rect = shapely.box(*box)
        hits = self.tree.query(rect, predicate="intersects")
        if hits.size == 0:
            return 0.0
        cut = shapely.clip_by_rect(self.pieces[hits], *box)
        return float(shapely.length(cut).sum())


def _pieces(lines: np.ndarray, transform: Affine) -> np.ndarray:
    """Each line of ``lines`` (shapely LineStrings / LinearRings, CRS of ``transform``) in canvas
    pixels, cut into pieces of :data:`_PIECE` segments (the last of a line fewer), each piece's
    first vertex the last of the one before; lines of fewer than 2 vertices are dropped. All
    in bulk: a line's vertex k starts piece k // _PIECE (k < n - 1) and, every _PIECE vertices,
    ends the piece before too (taken twice, in place: no sort)."""
    import shapely

    if not len(lines):
        return np.empty(0, dtype=object)
    xy, line = shapely.get_coordinates(lines, return_index=True)
    counts = np.bincount(line, minlength=len(lines))
    first = np.concatenate(([0], np.cumsum(counts)[:-1]))
    n = counts[line]                                # vertices of each vertex's line
    keep = n >= 2
    xy, line, n = xy[keep], line[keep], n[keep]
    k = np.arange(len(line)) - first[line]          # the vertex's place in its line
    piece = np.where(k <= n - 2, k // _PIECE, (k - 1) // _PIECE)
    # each line's pieces numbered after the pieces of the lines before it
    per_line = np.where(counts >= 2, (counts - 2) // _PIECE + 1, 0)
    start = np.concatenate(([0], np.cumsum(per_line)[:-1]))
    # a vertex that also ends the piece before comes twice: first for that piece, then its own
    ends = (k % _PIECE == 0) & (k >= 1) & (k <= n - 2)
    reps = 1 + ends
    px = np.repeat(to_pixels(xy, transform), reps, axis=0)
    pid = np.repeat(start[line] + piece, reps)
    pid[(np.cumsum(reps) - reps)[ends]] -= 1
    return np.asarray(shapely.linestrings(px, indices=pid), dtype=object).reshape(-1)


def area_anchor(geom, tolerance: float):
    """The pole of inaccessibility of a (multi)polygon -- of its largest part -- within
    ``tolerance`` CRS units, and that part; for other geometries their representative point and
    None."""
    from shapely.ops import polylabel

    if geom.geom_type == "MultiPolygon":
        geom = max(geom.geoms, key=lambda g: g.area)
    if geom.geom_type != "Polygon" or geom.is_empty or geom.area <= 0:
        import shapely
        return shapely.point_on_surface(geom), None
    return polylabel(geom, tolerance=max(float(tolerance), 1e-9)), geom


def _item(item) -> LabelItem:
    if isinstance(item, LabelItem):
        return item
    p = float(item[3]) if len(item) > 3 and item[3] is not None else 0.0
    text = "" if item[2] is None else str(item[2])
    return LabelItem(float(item[0]), float(item[1]), text, -math.inf if math.isnan(p) else p)


def place_labels(items: Iterable[tuple], canvas_transform: Affine, width: int, height: int,
                 size_px: float, font: str = "DejaVu Sans", weight: str = "normal",
                 halo_px: float = 0.0, offset_px: float = 3.0,
                 blocked: Iterable[tuple[float, float, float, float]] = (),
                 avoid: LinesToAvoid | Iterable | None = None) -> Placement:
    """Place point labels on the whole canvas.

    items: :class:`LabelItem` or tuples ``(x, y, text[, priority])`` in CRS coordinates (a NaN
    priority goes last).

    size_px: font size in pixels; halo_px: total halo width (the box grows by half of it on each
    side); offset_px: distance from the point to the text box; blocked: canvas pixel boxes
    (col0, row0, col1, row1) no label may overlap (page furniture); avoid: line features
    (:class:`LinesToAvoid`, or shapely lines / polygons in CRS coordinates) point labels keep
    off where a free position allows (see the module). Returns a :class:`Placement`.
    """
    items = [_item(it) for it in items]
    if avoid is not None and not isinstance(avoid, LinesToAvoid):
        avoid = LinesToAvoid(avoid, canvas_transform)
    if avoid is not None and not len(avoid):
        avoid = None
    order = sorted(range(len(items)), key=lambda i: -items[i].priority)  # stable for ties
    grid = BoxGrid()
    for box in blocked:
        grid.add(tuple(float(v) for v in box))
    grow = max(float(halo_px), 0.0) / 2.0
    placed, unplaced = [], []
    xy = to_pixels(np.array([(it.x, it.y) for it in items], np.float64).reshape(-1, 2),
                   canvas_transform)
    for i in order:
        item = items[i]
        found = None
        if item.text.strip():
            shape = measure_text(item.text, float(size_px), font, weight)
            if item.area is not None:
                found = _inside_fit(shape, xy[i], item.area, canvas_transform, grow, width,
                                    height, grid)
            if found is None:
                found = _first_fit(shape, xy[i], offset_px, grow, width, height, grid, avoid)
        if found is None:
            unplaced.append(item)
            continue
        position, anchor, col, row, box = found
        grid.add(box)
        placed.append(PlacedLabel(item.text, item.x, item.y, item.priority, position, anchor,
                                  col, row, box, shape))
    return Placement(tuple(placed), tuple(unplaced), canvas_transform, int(width), int(height),
                     float(halo_px))


def _inside_fit(shape: TextShape, point, area, transform: Affine, grow: float, width: int,
                height: int, grid: BoxGrid):
    """The box centred on ``point`` (pixels) when it lies inside ``area`` (CRS) and is free."""
    import shapely

    col, row = float(point[0]), float(point[1])
    left, bottom = col - shape.width / 2, row + shape.height / 2
    box = (left - grow, bottom - shape.height - grow, left + shape.width + grow, bottom + grow)
    if box[0] < 0 or box[1] < 0 or box[2] > width or box[3] > height or grid.hits(box):
        return None
    corners = np.array([(box[0], box[1]), (box[2], box[1]), (box[2], box[3]), (box[0], box[3])])
    xy = np.array([transform @ (c, r) for c, r in corners])
    if not shapely.contains(area, shapely.Polygon(xy)):
        return None
    return "inside", "center", col, row, box


def _first_fit(shape: TextShape, point, offset_px: float, grow: float, width: int, height: int,
               grid: BoxGrid, avoid: LinesToAvoid | None = None):
    best, least = None, math.inf        # with ``avoid``: the free position crossing least
    for position, anchor, (ux, uy) in POSITIONS:
        fx, fy = ANCHORS[anchor]
        col = float(point[0]) + ux * offset_px
        row = float(point[1]) + uy * offset_px
        left = col - fx * shape.width
        bottom = row + fy * shape.height
        box = (left - grow, bottom - shape.height - grow, left + shape.width + grow, bottom + grow)
        if box[0] < 0 or box[1] < 0 or box[2] > width or box[3] > height:
            continue
        if grid.hits(box):
            continue
        if avoid is None:
            return position, anchor, col, row, box
        crossed = avoid.crossed(box)
        if crossed <= 0.0:
            return position, anchor, col, row, box
        if crossed < least:
            best, least = (position, anchor, col, row, box), crossed
    return best


def draw_labels(placement: Placement, window_transform: Affine, width: int, height: int
                ) -> tuple[np.ndarray, np.ndarray | None]:
    """Draw the placed labels whose box meets the window given by ``window_transform`` and size.

    The window must be on the canvas's pixel grid (``Canvas.window_transform``). Returns
    (text coverage, halo coverage or None without a halo), float32 (H, W) in [0, 1].
    """
    c0, r0 = to_pixels(np.array([[window_transform.c, window_transform.f]]),
                       placement.transform)[0]
    grow = max(placement.halo_px, 0.0) / 2.0
    shapes = []
    for lab in placement.placed:
        b = lab.box
        if b[2] <= c0 or b[0] >= c0 + width or b[3] <= r0 or b[1] >= r0 + height:
            continue
        shapes.append((lab.shape, b[0] + grow - c0, b[3] - grow - r0))
    return draw_text_shapes(shapes, width, height, placement.halo_px)
