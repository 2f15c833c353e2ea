"""The output grid of ``[map]``, worked out from what the style states and, if asked, from data.

``[map]`` may state the grid outright (``crs``, ``extent``, ``pixel``) or leave parts of it to a
raster layer (``like = "layer name"``: that layer's CRS, extent and pixel size), give the pixel
count across instead of the pixel size (``width``), and give the extent in another CRS
(``extent_crs``; its box is transformed with densified edges and the smallest box around it is
used). What is stated wins over what ``like`` supplies.

A canvas has whole, square pixels, so the extent's east and south edges may move to fit; every
such move (and every choice made for the user, such as a square pixel for a source with
rectangular cells) is returned as a :class:`CanvasPlan` note, so callers can say so.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from compose.canvas import Canvas
from compose.errors import StyleError

__all__ = ["CanvasPlan", "plan_canvas"]


@dataclass(frozen=True, slots=True)
class CanvasPlan:
    """The canvas and the notes (one line each) about how it was derived or adjusted."""

    canvas: Canvas
    notes: tuple[str, ...] = ()


def _fmt(v: float) -> str:
    return f"{v:.10g}"


def _like_source(style, name: str):
    """The open raster of the layer ``name`` (the caller closes it)."""
    from compose.sources.raster import RasterSource

    layer = next((l for l in style.layers if l.name == name), None)
    if layer is None:
        raise StyleError(f'map.like: no enabled layer named "{name}"')
    band = getattr(layer.options, "band", None)
    if band is None:
        raise StyleError(f'map.like: layer "{name}" is a {layer.kind} layer; like needs a raster '
                         "layer (relief, field or classes)")
    return RasterSource(layer.source, band, layer=name)


def _from_source(src, crs: str | None) -> tuple[str, tuple, float, list[str]]:
    """(crs, extent, pixel, notes) of a source's own grid, or of its footprint in ``crs``."""
    from rasterio.crs import CRS
    from rasterio.warp import calculate_default_transform

    notes: list[str] = []
    west, south, east, north = src.bounds
    rx, ry = src.res
    if crs is None or CRS.from_user_input(crs) == src.crs:
        epsg = src.crs.to_epsg()
        own = f"EPSG:{epsg}" if epsg is not None else src.crs.to_wkt()
        pixel = min(rx, ry)
        if not math.isclose(rx, ry, rel_tol=1e-9):
            notes.append(f'map.like: the cells of "{src.layer}" are {_fmt(rx)} x {_fmt(ry)}; the '
                         f"canvas uses square pixels of {_fmt(pixel)}")
        return crs or own, (west, south, east, north), pixel, notes
    w, h = (int(v) for v in (src._ds.width, src._ds.height))
    try:
        transform, _, _ = calculate_default_transform(src.read_crs, crs, w, h, west, south, east, north)
        from rasterio.warp import transform_bounds
        box = transform_bounds(src.read_crs, crs, west, south, east, north, densify_pts=21)
    except Exception as exc:  # rasterio raises several types for impossible transforms
        raise StyleError(f'map.like: cannot transform the grid of "{src.layer}" to {crs}: '
                         f"{str(exc).splitlines()[0] if str(exc) else type(exc).__name__}") from None
    return crs, tuple(box), abs(transform.a), notes


def _transform_extent(extent, src_crs: str, dst_crs: str) -> tuple[float, float, float, float]:
    from rasterio.errors import RasterioError
    from rasterio.warp import transform_bounds

    try:
        box = transform_bounds(src_crs, dst_crs, *extent, densify_pts=21)
    except (RasterioError, ValueError) as exc:
        raise StyleError(f"map.extent_crs: cannot transform the extent from {src_crs} to {dst_crs}: "
                         f"{exc}") from None
    if not all(math.isfinite(v) for v in box) or not (box[2] > box[0] and box[3] > box[1]):
        raise StyleError(f"map.extent_crs: the extent {list(extent)} in {src_crs} has no finite "
                         f"box in {dst_crs}")
    return tuple(float(v) for v in box)


def plan_canvas(style) -> CanvasPlan:
    """Work out the canvas of ``style.map`` (see the module docstring). Raises StyleError."""
    m = style.map
    if m is None:
        raise StyleError(f"{style.path}: no [map] table, so there is no canvas")
    notes: list[str] = []
    crs, extent, pixel = m.crs, m.extent, m.pixel
    if m.like is not None:
        src = _like_source(style, m.like)
        try:
            like_crs, like_extent, like_pixel, like_notes = _from_source(src, crs)
        finally:
            src.close()
        if crs is None:
            crs = like_crs
        if extent is None:
            extent = like_extent
            if m.extent_crs is not None:
                raise StyleError("map.extent_crs: give map.extent too (like supplies an extent in "
                                 "the map's CRS)")
        if pixel is None and m.width is None:
            pixel = like_pixel
            notes += like_notes
    if crs is None or extent is None:
        raise StyleError("map: the canvas needs crs and extent, or like = \"a raster layer's name\"")
    if m.extent_crs is not None and m.extent is not None:
        extent = _transform_extent(extent, m.extent_crs, crs)
        notes.append(f"map.extent: [{', '.join(_fmt(v) for v in m.extent)}] in {m.extent_crs} "
                     f"is [{', '.join(_fmt(v) for v in extent)}] in {crs}")
    west, south, east, north = extent
    if m.width is not None:
        pixel = (east - west) / m.width
    if pixel is None:
        raise StyleError("map: give pixel (CRS units per pixel) or width (pixels across)")
    canvas = Canvas.from_extent(crs, extent, pixel, m.dpi)
    _, new_south, new_east, _ = canvas.bounds
    if not math.isclose(new_east, east, rel_tol=0, abs_tol=1e-6 * pixel):
        notes.append(f"map.extent: east edge moved from {_fmt(east)} to {_fmt(new_east)} to fit "
                     f"{canvas.width} whole pixels of {_fmt(pixel)}")
    if not math.isclose(new_south, south, rel_tol=0, abs_tol=1e-6 * pixel):
        notes.append(f"map.extent: south edge moved from {_fmt(south)} to {_fmt(new_south)} to fit "
                     f"{canvas.height} whole pixels of {_fmt(pixel)}")
    return CanvasPlan(canvas, tuple(notes))
