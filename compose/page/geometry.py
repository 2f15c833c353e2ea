"""Geodesy of the page: the canvas a print scale gives, true ground distance for the scale bar,
the direction of true north, and grid lines of any CRS across the map frame.

Distances are geodesic on the CRS's ellipsoid (pyproj ``Geod``), so the scale bar states true
ground distance at the map centre whatever the projection; angles are degrees clockwise from
grid up (the top of the map frame).
"""
from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from affine import Affine

from compose.canvas import Canvas
from compose.errors import StyleError

__all__ = ["MM_PER_INCH", "page_canvas", "metres_per_unit", "ground_scale", "north_angle",
           "ScaleBar", "scale_bar", "grid_lines", "nice_length", "UNIT_LENGTHS", "bar_divisions",
           "BAR_LABEL_PT"]

MM_PER_INCH = 25.4
#: Metres in a unit of length (international yard and pound agreement, 1959: 1 ft = 0.3048 m).
UNIT_LENGTHS = {"m": 1.0, "km": 1000.0, "ft": 0.3048, "mi": 1609.344}


def _crs(crs):
    from pyproj import CRS
    return CRS.from_user_input(crs)


def metres_per_unit(crs) -> float | None:
    """Metres in one unit of the CRS's first axis (None for angular units)."""
    c = _crs(crs)
    if c.is_geographic:
        return None
    axis = c.axis_info[0] if c.axis_info else None
    return float(axis.unit_conversion_factor) if axis is not None else 1.0


def page_canvas(map_spec, frame_mm: tuple[float, float] | None, room_mm: tuple[float, float],
                scale: float | None) -> tuple[Canvas, tuple[float, float]]:
    """The canvas and map frame size (mm) of a page.

    With ``scale`` (1:n) the pixel follows from the scale and ``map_spec.dpi`` and the frame is
    the extent at that scale (or ``frame_mm``, the extent then recentred on its centre). Without
    it the pixel is ``map_spec.pixel``, the frame is ``frame_mm`` or the largest box of the
    extent's shape that fits ``room_mm``, and the dpi follows (canvas pixels / frame inches), so
    sizes in points on the map are points on paper.
    """
    west, south, east, north = map_spec.extent
    cx, cy = (west + east) / 2, (south + north) / 2
    ew, eh = east - west, north - south
    if scale is not None:
        mpu = metres_per_unit(map_spec.crs)
        if mpu is None:
            raise StyleError("page.scale: a print scale needs a projected CRS (map.crs is "
                             "geographic); give page.frame instead")
        if frame_mm is None:
            frame_mm = (ew * mpu / scale * 1000.0, eh * mpu / scale * 1000.0)
        dpi = float(map_spec.dpi)
        pixel = scale * (MM_PER_INCH / 1000.0) / dpi / mpu        # CRS units per pixel
        width = max(1, round(frame_mm[0] / MM_PER_INCH * dpi))
        height = max(1, round(frame_mm[1] / MM_PER_INCH * dpi))
    else:
        pixel = float(map_spec.pixel)
        if frame_mm is None:
            k = min(room_mm[0] / ew, room_mm[1] / eh)
            frame_mm = (ew * k, eh * k)
        aspect = frame_mm[0] / frame_mm[1]
        if ew / eh < aspect:       # grow the extent to the frame's shape around its centre
            ew = eh * aspect
        else:
            eh = ew / aspect
        width = max(1, math.ceil(ew / pixel - 1e-9))
        height = max(1, round(width / aspect))
        dpi = width / (frame_mm[0] / MM_PER_INCH)
    frame = (width / dpi * MM_PER_INCH, height / dpi * MM_PER_INCH)
    if frame[0] > room_mm[0] + 0.01 or frame[1] > room_mm[1] + 0.01:
        # thousands in thin-space groups, as the page's own scale line writes them
        what = (f"the map at 1:{scale:,.0f}".replace(",", "\u2009") if scale is not None
                else "page.frame")
        raise StyleError(f"page: {what} is {frame[0]:.0f} x {frame[1]:.0f} mm but the page leaves "
                         f"{room_mm[0]:.0f} x {room_mm[1]:.0f} mm for it; use a smaller scale, "
                         f"a larger paper or smaller margins")
    transform = Affine(pixel, 0.0, cx - width * pixel / 2, 0.0, -pixel, cy + height * pixel / 2)
    return Canvas(crs=map_spec.crs, transform=transform, width=width, height=height, dpi=dpi), frame


def _to_lonlat(crs):
    from pyproj import Transformer
    return Transformer.from_crs(_crs(crs), _crs(crs).geodetic_crs, always_xy=True)


def ground_scale(canvas: Canvas, x: float | None = None, y: float | None = None) -> float:
    """Metres on the ground per CRS unit along the canvas's x axis at (x, y) (default: the
    centre), from the geodesic length of a short east-west step (pyproj Geod on the CRS's
    ellipsoid)."""
    west, south, east, north = canvas.bounds
    x = (west + east) / 2 if x is None else x
    y = (south + north) / 2 if y is None else y
    step = (east - west) / 100.0
    lon, lat = _to_lonlat(canvas.crs).transform([x - step / 2, x + step / 2], [y, y])
    geod = _geod(canvas.crs)
    _, _, dist = geod.inv(lon[0], lat[0], lon[1], lat[1])
    return float(dist) / step


def _geod(crs):
    from pyproj import Geod
    return _crs(crs).get_geod() or Geod(ellps="WGS84")


def north_angle(canvas: Canvas) -> float:
    """Direction of true north at the canvas centre, degrees clockwise from grid up.

    Found by projecting a 1-arc-second northward step from the centre (away from a pole)."""
    from pyproj import Transformer

    west, south, east, north = canvas.bounds
    x, y = (west + east) / 2, (south + north) / 2
    lon, lat = _to_lonlat(canvas.crs).transform(x, y)
    d = 1.0 / 3600.0 if lat < 89.0 else -1.0 / 3600.0
    back = Transformer.from_crs(_crs(canvas.crs).geodetic_crs, _crs(canvas.crs), always_xy=True)
    x2, y2 = back.transform(lon, lat + d)
    dx, dy = (x2 - x), (y2 - y)
    if d < 0:
        dx, dy = -dx, -dy
    return math.degrees(math.atan2(dx, dy))


def nice_length(limit: float) -> float:
    """The largest 1, 2 or 5 x 10^k not above ``limit`` (> 0)."""
    k = math.floor(math.log10(limit))
    for m in (5.0, 2.0, 1.0):
        if m * 10.0 ** k <= limit * (1 + 1e-12):
            return m * 10.0 ** k
    return 10.0 ** (k - 1) * 5.0


@dataclass(frozen=True, slots=True)
class ScaleBar:
    """A scale bar: ``length_mm`` on paper stands for ``length`` ``unit`` on the ground, cut in
    ``segments`` equal parts; ``metres`` is that length in metres; ``note`` says where the scale
    holds when it varies across the map (empty otherwise); ``ratio`` is n of the true scale 1:n
    at the map centre; ``marks`` the boundaries (0 to ``segments``) that carry a label."""

    length_mm: float
    length: float
    unit: str
    segments: int
    metres: float
    note: str
    ratio: float = 0.0
    marks: tuple[int, ...] = ()

    def label(self, i: int) -> str:
        """The label of boundary ``i``: its distance from 0 in ``unit`` (a minus sign, never a
        hyphen)."""
        return f"{self.length / self.segments * i:g}".replace("-", "\u2212")


#: the scale bar's label type (pt) and the least room between two labels (mm; common practice,
#: no source: a clear gap of about a letter's width at that size)
BAR_LABEL_PT, BAR_LABEL_GAP = 6.5, 1.0


def _label_width(text: str) -> float:
    """Width (mm) of a scale bar label in the page's font (its own glyph metrics)."""
    from compose.layers.label_text import text_width

    return text_width(text, BAR_LABEL_PT, "DejaVu Sans", "normal") * MM_PER_INCH / 72.0


def bar_divisions(length: float, length_mm: float, segments: int) -> tuple[int, tuple[int, ...]]:
    """(segments, labelled boundaries) of a bar ``length`` units long drawn ``length_mm`` long:
    every boundary of ``segments`` equal parts labelled when each label, centred on its
    boundary, keeps :data:`BAR_LABEL_GAP` from the next (measured in the page's font); else
    every other one; else the bar cut in halves (0, the middle, the end); else its ends alone.
    Labels were dropped to the ends and the middle whenever a part was under 6 mm, however
    short the labels: a 5 mile bar 27.7 mm long in miles read "0" and "5" only."""
    def fits(parts: int, marks: Sequence[int]) -> bool:
        step_mm = length_mm / parts
        texts = [ScaleBar(length_mm, length, "", parts, 0.0, "").label(i) for i in marks]
        widths = [_label_width(t) for t in texts]
        return all((b - a) * step_mm >= (wa + wb) / 2 + BAR_LABEL_GAP
                   for a, b, wa, wb in zip(marks, marks[1:], widths, widths[1:]))

    every = tuple(range(segments + 1))
    if fits(segments, every):
        return segments, every
    if segments % 2 == 0 and fits(segments, every[::2]):
        return segments, every[::2]
    if fits(2, (0, 1, 2)):
        return 2, (0, 1, 2)
    return segments, (0, segments)


def _latitude(lat: float) -> str:
    return f"{abs(lat):.1f}\u00b0{'N' if lat >= 0 else 'S'}"


def scale_bar(canvas: Canvas, frame_width_mm: float, max_mm: float,
              units: str = "metric") -> ScaleBar:
    """The longest round scale bar not longer than ``max_mm`` for a map frame ``frame_width_mm``
    wide showing ``canvas``; ground distance is geodesic at the map centre along the x axis."""
    k = ground_scale(canvas)                                   # metres per CRS unit
    m_per_mm = k * canvas.pixel * canvas.width / frame_width_mm
    limit_m = max_mm * m_per_mm
    if units == "metric":
        unit = "km" if limit_m >= 1000 else "m"
    else:
        unit = "mi" if limit_m >= UNIT_LENGTHS["mi"] else "ft"
    length = nice_length(limit_m / UNIT_LENGTHS[unit])
    metres = length * UNIT_LENGTHS[unit]
    mantissa = round(length / 10 ** math.floor(math.log10(length)))
    segments, marks = bar_divisions(length, metres / m_per_mm,
                                    {1: 5, 2: 4, 5: 5}.get(mantissa, 4))
    # how far the scale varies over the frame: compare the scale at the edges with the centre
    west, south, east, north = canvas.bounds
    cx, cy = (west + east) / 2, (south + north) / 2
    ks = [ground_scale(canvas, cx, y) for y in (south, north)] + \
         [ground_scale(canvas, x, cy) for x in (west, east)]
    spread = max(abs(v / k - 1) for v in ks)
    note = ""
    if _crs(canvas.crs).is_geographic or spread > 0.005:
        _, lat = _to_lonlat(canvas.crs).transform(cx, cy)
        note = f"true at {_latitude(float(lat))} (map centre); varies by up to {spread:.0%}"
    return ScaleBar(metres / m_per_mm, float(length), unit, segments, float(metres), note,
                    m_per_mm * 1000.0, marks)


def grid_lines(canvas: Canvas, crs: str | None, step: float, samples: int = 128
               ) -> list[tuple[str, float, np.ndarray]]:
    """Lines of constant coordinate of ``crs`` (default the canvas's) every ``step`` units over
    the canvas: (axis "x" or "y", value, (n, 2) canvas pixel (col, row)) each, densely sampled so
    curved graticules stay curved."""
    from pyproj import Transformer

    target = _crs(crs or canvas.crs)
    fwd = Transformer.from_crs(_crs(canvas.crs), target, always_xy=True)
    back = Transformer.from_crs(target, _crs(canvas.crs), always_xy=True)
    west, south, east, north = canvas.bounds
    x0, y0, x1, y1 = fwd.transform_bounds(west, south, east, north, densify_pts=64)
    if (x1 - x0) / step > 200 or (y1 - y0) / step > 200:
        raise StyleError(f"page.grid.step: {step:g} gives more than 200 lines over the map")
    from compose.layers.paths import to_pixels

    out = []
    for axis, lo, hi, (a0, a1) in (("x", x0, x1, (y0, y1)), ("y", y0, y1, (x0, x1))):
        v = math.ceil(lo / step - 1e-9) * step
        # A little past the envelope at both ends: a line whose far end only touches the
        # frame (a meridian meeting the top edge at its highest latitude) must still cross it.
        pad = 0.02 * (a1 - a0)
        a0, a1 = a0 - pad, a1 + pad
        if target.is_geographic and axis == "x":
            a0, a1 = max(a0, -90.0), min(a1, 90.0)
        t = np.linspace(a0, a1, samples)
        while v <= hi + 1e-9 * abs(step):
            xs, ys = (np.full_like(t, v), t) if axis == "x" else (t, np.full_like(t, v))
            mx, my = back.transform(xs, ys)
            pts = to_pixels(np.column_stack([mx, my]), canvas.transform)
            pts = pts[np.all(np.isfinite(pts), axis=1)]
            if len(pts) > 1:
                out.append((axis, float(round(v / step) * step), pts))
            v += step
    return out
