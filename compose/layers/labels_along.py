"""Labels along lines: a name set straight along a smooth stretch of its line, upright, repeated
every ``spacing`` pixels, and kept clear of other labels and of the page furniture.

Rule (common practice, no source): candidate centres sit at ``spacing / 2``, ``3 spacing / 2``,
... along each line (longest lines first within a priority); the stretch the text covers must be
nearly straight -- no vertex of it further than :data:`STRAIGHT` text heights from the chord --
and the text follows the chord just above the line (:data:`LIFT`), turned so it never reads
upside down (screen angle in (-90, 90] degrees); a candidate that fails slides along the line
(:data:`SLIDES`). A candidate whose box (grown by half the halo) leaves the canvas or meets a placed box is
skipped. Boxes are kept axis-aligned around the turned text, so the test is conservative.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from matplotlib.path import Path

from compose.layers.draw import TextShape, measure_text
from compose.layers.paths import flatten, to_pixels

__all__ = ["AlongLabel", "place_along", "draw_along", "text_frame", "STRAIGHT", "LIFT"]

#: the largest distance of the line from the chord under the text, in text heights
STRAIGHT = 0.8
#: the gap between the line and the text box, in text heights (the name sits above its line)
LIFT = 0.25
#: where else a candidate may slide along its line, in spacings
SLIDES = np.array([0.1, -0.1, 0.2, -0.2, 0.3, -0.3, 0.4, -0.4])


@dataclass(frozen=True, slots=True)
class AlongLabel:
    """A label set along a line, in canvas pixels (rows down).

    angle: screen angle in degrees, counter-clockwise; col, row: the baseline-left anchor;
    box: (col0, row0, col1, row1) around the turned text, grown by half the halo.
    """

    text: str
    angle: float
    col: float
    row: float
    box: tuple[float, float, float, float]
    shape: TextShape = field(compare=False, repr=False)


def text_frame(angle: float) -> tuple[np.ndarray, np.ndarray]:
    """(u, v): unit vectors in canvas pixels (rows down) along the text and toward its top, for
    a screen angle in degrees counter-clockwise."""
    t = math.radians(angle)
    return np.array([math.cos(t), -math.sin(t)]), np.array([-math.sin(t), -math.cos(t)])


def _parts(geoms, transform) -> list[np.ndarray]:
    import shapely

    g = flatten(geoms)
    if not len(g):
        return []
    xy, idx = shapely.get_coordinates(g, return_index=True)
    px = to_pixels(xy, transform)
    cuts = np.flatnonzero(np.diff(idx)) + 1
    return [p for p in np.split(px, cuts) if len(p) > 1]


def _point_at(pts: np.ndarray, cum: np.ndarray, s: float) -> np.ndarray:
    i = int(np.clip(np.searchsorted(cum, s) - 1, 0, len(pts) - 2))
    seg = cum[i + 1] - cum[i]
    t = 0.0 if seg <= 0 else (s - cum[i]) / seg
    return pts[i] + t * (pts[i + 1] - pts[i])


def place_along(items, transform, width: int, height: int, *, size_px: float,
                font: str = "DejaVu Sans", weight: str = "normal", halo_px: float = 0.0,
                spacing_px: float = 300.0, grid=None) -> tuple[list[AlongLabel], list[str]]:
    """Place ``items`` = [(line geometry in canvas CRS, text, priority)] along their lines.

    ``grid``: a collision grid shared with other labels (:class:`compose.layers.label_placement.BoxGrid`).
    Returns (placed labels, texts of the items that found no place).
    """
    from compose.layers.label_placement import BoxGrid

    grid = grid if grid is not None else BoxGrid()
    grow = max(float(halo_px), 0.0) / 2.0
    placed: list[AlongLabel] = []
    unplaced: list[str] = []
    order = sorted(range(len(items)), key=lambda i: -float(items[i][2]))
    for i in order:
        geom, text, _ = items[i]
        shape = measure_text(text, float(size_px), font, weight)
        w, _h = shape.width, shape.height
        parts = sorted(_parts([geom], transform), key=lambda p: -float(
            np.sum(np.hypot(*np.diff(p, axis=0).T))))
        found = 0
        for pts in parts:
            d = np.hypot(*np.diff(pts, axis=0).T)
            cum = np.concatenate([[0.0], np.cumsum(d)])
            total = float(cum[-1])
            if total < w * 1.2:
                continue
            step = max(spacing_px, w * 1.5)
            starts = np.arange(step / 2, total, step) if total >= step else np.array([total / 2])
            for s in starts:
                lab = _fit(pts, cum, float(s), shape, grow, width, height, grid)
                if lab is None:
                    for ds in SLIDES * step:                 # slide along before giving up
                        if w / 2 <= s + ds <= total - w / 2:
                            lab = _fit(pts, cum, float(s + ds), shape, grow, width, height, grid)
                            if lab is not None:
                                break
                if lab is not None:
                    grid.add(lab.box)
                    placed.append(lab)
                    found += 1
        if not found:
            unplaced.append(text)
    return placed, unplaced


def _fit(pts, cum, s, shape: TextShape, grow, width, height, grid) -> AlongLabel | None:
    w, h = shape.width, shape.height
    a, b = s - w / 2, s + w / 2
    if a < 0 or b > cum[-1]:
        return None
    p0, p1 = _point_at(pts, cum, a), _point_at(pts, cum, b)
    chord = p1 - p0
    n = float(np.hypot(*chord))
    if n < w * 0.8:                                  # the stretch bends back on itself
        return None
    inner = pts[(cum > a) & (cum < b)]
    if len(inner):
        normal = np.array([-chord[1], chord[0]]) / n
        if float(np.max(np.abs((inner - p0) @ normal))) > h * STRAIGHT:
            return None                              # not straight enough for straight text
    angle = math.degrees(math.atan2(-chord[1], chord[0]))   # screen angle, rows down
    if angle > 90:
        angle -= 180
    elif angle <= -90:
        angle += 180
    u, v = text_frame(angle)
    centre = (p0 + p1) / 2 + v * h * (0.5 + LIFT)   # the box sits just above the line
    anchor = centre - u * w / 2 - v * (shape.ascent - shape.descent) / 2
    corners = np.array([anchor + u * x + v * y for x in (0.0, w) for y in (-shape.descent,
                                                                            shape.ascent)])
    box = (float(corners[:, 0].min() - grow), float(corners[:, 1].min() - grow),
           float(corners[:, 0].max() + grow), float(corners[:, 1].max() + grow))
    if box[0] < 0 or box[1] < 0 or box[2] > width or box[3] > height or grid.hits(box):
        return None
    return AlongLabel(shape.text, angle, float(anchor[0]), float(anchor[1]), box, shape)


def draw_along(labels: list[AlongLabel], c0: float, r0: float, width: int, height: int,
               halo_px: float = 0.0) -> tuple[np.ndarray | None, np.ndarray | None]:
    """Coverage (text, halo) of the labels meeting the window whose top-left canvas pixel is
    (c0, r0), or (None, None) when none does."""
    from compose.layers.draw import fill_text_path

    verts, codes = [], []
    for lab in labels:
        b = lab.box
        if b[2] <= c0 or b[0] >= c0 + width or b[3] <= r0 or b[1] >= r0 + height:
            continue
        if len(lab.shape.vertices) == 0:
            continue
        u, v = text_frame(lab.angle)
        x, y = lab.shape.vertices[:, 0:1], lab.shape.vertices[:, 1:2]
        px = np.array([lab.col - c0, lab.row - r0]) + x * u + y * v
        px[:, 1] = height - px[:, 1]                 # Agg display: y up
        verts.append(px)
        codes.append(lab.shape.codes)
    if not verts:
        return None, None
    path = Path(np.concatenate(verts), np.concatenate(codes), readonly=True)
    return fill_text_path(path, width, height, halo_px)
