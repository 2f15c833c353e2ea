"""The page's guess, made when the render is prepared, of which layers will show no-data on the
map: the legend shows a no-data entry for those (:func:`compose.output.legend.legend_layout`),
so the page's legend, layout and furniture depend on the set. The walk's statistics give the
true set only at its end; a page process that drew from a guess uses what it drew only when the
guess was that set (:meth:`compose.page.write.EarlyPage.holds_for`), else it draws the page
again, so the guess decides how early the page is done, never what it shows.

The guess reads what the sources say of themselves (no pixels): a layer is guessed to show
no-data when it draws its no-data colour (a ``field`` or ``classes`` layer whose ``nodata`` is
not ``"transparent"``; a relief's no-data is always transparent) and its source may have cells
without data on the canvas: a nodata value, a mask or alpha band, or a footprint that does not
cover the canvas. A source with a nodata value but not one such cell on the canvas makes a wrong
guess (the page is then drawn after the walk, as without a guess).
"""
from __future__ import annotations

import math

__all__ = ["nodata_guess", "may_show_nodata"]


def _covers(source, canvas) -> bool:
    """Whether ``source``'s footprint holds the whole canvas (False when that is not known)."""
    try:
        west, south, east, north = canvas.bounds
        if source.read_crs == canvas.crs:
            box = (west, south, east, north)
        else:
            from rasterio.warp import transform_bounds

            box = transform_bounds(canvas.crs, source.read_crs, west, south, east, north,
                                   densify_pts=21)
        if not all(map(math.isfinite, box)):
            return False
        sw, ss, se, sn = source.bounds
        # (a canvas edge on the footprint's edge is inside: a tolerance of a millionth of a
        # source cell against the rounding of the bounds' arithmetic)
        rx, ry = source.res
        tx, ty = 1e-6 * rx, 1e-6 * ry
        return (box[0] >= sw - tx and box[2] <= se + tx and box[1] >= ss - ty
                and box[3] <= sn + ty)
    except Exception:                                   # noqa: BLE001 - not known: may not
        return False


def may_show_nodata(layer, canvas) -> bool:
    """Whether the prepared ``layer`` may draw its no-data colour on ``canvas``, from its source's
    own description (see the module's text)."""
    if getattr(layer, "transparent_nodata", True):      # transparent, or not a data raster
        return False
    if getattr(layer.spec, "opacity", 1.0) <= 0:
        return False
    source = getattr(layer, "source", None)
    flags = getattr(source, "mask_flags", None)
    if source is None or flags is None:
        return True
    return flags != frozenset({"all_valid"}) or not _covers(source, canvas)


def nodata_guess(layers, canvas) -> frozenset[str] | None:
    """Names of the prepared ``layers`` guessed to show no-data on ``canvas`` (see the module's
    text), or None when the layers cannot tell (no guess)."""
    try:
        return frozenset(layer.spec.name for layer in layers if may_show_nodata(layer, canvas))
    except Exception:                                   # noqa: BLE001 - no guess then
        return None
