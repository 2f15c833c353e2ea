"""The relief layer: a muted, tinted hillshade (Horn 1981) coloured through a lookup table.

Shade s in [0, 1] (Lambertian, from :mod:`compose.layers.hillshade`) is quantised to
:data:`compose.ramps.relief.LEVELS` entries and drawn through the relief's colour ramp
(:mod:`compose.ramps.relief`: tint, shadow, strength).
"""
from __future__ import annotations

import threading

import numpy as np
from affine import Affine

from compose.canvas import Canvas, Window
from compose.kernels import get as compiled
from compose.layers.base import Context, Paint, Palette
from compose.layers.early import PAD, BlockSample, EarlyRead
from compose.layers.hillshade import centre_gradient, multidirectional, shade_gradient, stretch_factor
from compose.layers.raster import open_raster
from compose.ramps.relief import LEVELS, relief_colors
from compose.sources.crs import metre_projected, never_mercator

__all__ = ["ReliefLayer", "relief_palette", "shade_levels", "ground_cell_size", "ground_scale", "LEVELS",
           "SAMPLE_WINDOWS", "SAMPLE_SIZE", "spread_windows"]

#: Guards a draft relief's stretch, decided on its early read's thread or where it paints
#: (module-wide: a lock in the layer would stop it being pickled for the page process).
_SETTLE = threading.Lock()

SAMPLE_WINDOWS = 9    # windows of the canvas read to measure the terrain for "auto" stretch
SAMPLE_SIZE = 128     # their side in canvas pixels (9 x 128^2 cells: a steady 95th percentile)


def ground_scale(crs):
    """For a Mercator-family CRS (scale depending on latitude only, e.g. Web Mercator,
    EPSG:3857): a function from projected y values to (ground metres per projected unit along x,
    along y) there, on the CRS's own ellipsoid -- the parallel's radius N cos(phi) and the
    meridian's M times the degrees a projected unit spans (central differences through pyproj);
    None for any other CRS, whose nominal cell size is used as it is (UTM and national grids stay
    within a fraction of a percent of the ground). A CRS rasterio's CRS shows to be no such
    projection (geographic, transverse, or no Mercator at all) is answered without pyproj."""
    if never_mercator(crs):
        return None
    from pyproj import CRS, Transformer

    crs = CRS.from_user_input(crs)
    op = crs.coordinate_operation
    method = op.method_name.lower() if op is not None else ""
    if not crs.is_projected or "mercator" not in method or "transverse" in method:
        return None
    to_geo = Transformer.from_crs(crs, crs.geodetic_crs, always_xy=True)
    ell = crs.ellipsoid
    a, b = float(ell.semi_major_metre), float(ell.semi_minor_metre)
    e2 = 1.0 - (b / a) ** 2
    unit = float(crs.axis_info[0].unit_conversion_factor)    # metres per projected unit

    def scale(y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        y = np.asarray(y, float)
        zero = np.zeros_like(y)
        lon_w, lat = to_geo.transform(zero - 0.5, y)
        lon_e, _ = to_geo.transform(zero + 0.5, y)
        _, lat_s = to_geo.transform(zero, y - 0.5)
        _, lat_n = to_geo.transform(zero, y + 0.5)
        phi = np.radians(lat)
        w = 1.0 - e2 * np.sin(phi) ** 2
        n, m = a / np.sqrt(w), a * (1.0 - e2) / w ** 1.5
        gx = n * np.cos(phi) * np.radians(np.asarray(lon_e) - np.asarray(lon_w))
        gy = m * np.radians(np.asarray(lat_n) - np.asarray(lat_s))
        return gx / unit, gy / unit

    return scale


def ground_cell_size(crs, transform, height: int, scale=None):
    """(dx, dy) metres on the ground of a north-up grid's cells: :func:`cell_size_metres`, or on
    a Mercator-family CRS (``scale`` from :func:`ground_scale`) the projected cell size times the
    ground metres per projected metre -- dx per row at the row's centre ((height, 1) array), dy at
    the grid's middle row -- so relief is shaded on the true ground slope at every latitude."""
    if scale is None:
        if metre_projected(crs):        # cell_size_metres's first answer, without rasterio
            return abs(transform.a), abs(transform.e)
        from compose.sources.raster import cell_size_metres

        return cell_size_metres(crs, transform, height)
    rows = np.arange(int(height), dtype=float)[:, None] + 0.5
    gx, _ = scale((transform.f + transform.e * rows).ravel())
    _, gy = scale(np.array([transform.f + transform.e * (int(height) / 2.0)]))
    unit = abs(transform.a), abs(transform.e)
    return unit[0] * gx.reshape(-1, 1), float(unit[1] * gy[0])


def shade_levels(shade: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A shade (H, W) float32 in [0, 1] (NaN: no data; changed in place) as the relief
    palette's entries: (index (H, W) uint16, shade x (LEVELS - 1) rounded half to even, LEVELS
    where not finite; alpha (H, W) float32, 1 where finite, else 0). One pass by the compiled
    kernel when there is one (:mod:`compose.kernels`; the same numbers)."""
    kernel = compiled()
    if kernel is not None and shade.dtype == np.float32 and shade.ndim == 2 \
            and shade.flags.c_contiguous:
        index = np.empty(shade.shape, np.uint16)
        alpha = np.empty(shade.shape, np.float32)
        if kernel.levels(shade, float(LEVELS - 1), index, alpha) >= 0:
            return index, alpha
    valid = np.isfinite(shade)
    shade *= np.float32(LEVELS - 1)          # in place: the shade is ours
    np.rint(shade, out=shade)
    shade[~valid] = LEVELS                   # the no-data entry
    return shade.astype(np.uint16), valid.astype(np.float32)


def relief_palette(tint, shadow, strength: float, altitude: float) -> Palette:
    """Lookup table of the relief's LEVELS colours for shade 0..1
    (:func:`compose.ramps.relief.relief_colors`), plus a transparent no-data entry at the end."""
    rgb8, s = relief_colors(tint, shadow, strength, altitude)
    rgb8 = np.vstack([rgb8, [[0, 0, 0]]])                                   # no-data entry
    values = np.append(s, np.nan)
    return Palette(rgb8=rgb8, values=values, nodata=LEVELS)


class ReliefLayer:
    """Hillshaded relief from a DEM (metres), tinted and muted."""

    margin = 2

    def __init__(self, spec, context: Context):
        self.spec = spec
        o = spec.options
        self.options = o
        self.canvas = context.canvas
        self.source = open_raster(spec, self.canvas, decimate=context.draft,
                                  full=_full_of_draft(context)[0] if context.draft else None)
        # the style fills ``shadow`` from the tint when it is not given (compose.ramps.relief.default_shadow)
        self.palette = relief_palette(o.tint, o.shadow, o.strength, o.altitude)
        self.scale = ground_scale(self.canvas.crs)
        # a projected CRS in metres: every window's cells are the canvas's own size in metres
        # (what cell_size_metres answers, looked up once instead of per window)
        self.metres = (abs(self.canvas.transform.a), abs(self.canvas.transform.e)) \
            if self.scale is None and metre_projected(self.canvas.crs) else None
        # a draft shades the full canvas's own cells, sampled (see _draft_shade)
        self.full: Canvas | None = None
        self.factor = 1
        self.sample: BlockSample | None = None
        if context.draft:
            self.full, self.factor = _full_of_draft(context)
            # a large file without overviews: a sample of its blocks (compose.layers.early)
            self.sample = BlockSample.of(self.source, self.canvas, self.full, self.factor)
        self.stretch = 1.0
        self.exaggeration = o.exaggeration
        self._settled = False
        # a sampled draft's Horn gradient of the window its stretch was measured on, until
        # that window is shaded (see _sampled_stretch)
        self._gathered: tuple | None = None
        if self.full is None:
            self._settle()
        # a draft's stretch is measured and its rows decoded beside the rest of the preparation
        # (compose.layers.early): the same numbers, off the preparing thread
        self.early = (EarlyRead(self.canvas, self._draft_shade, self.source)
                      if self.full is not None else None)

    def _settle(self) -> None:
        """Decide the "auto" stretch once (before the first shade is made)."""
        with _SETTLE:
            if not self._settled:
                o = self.options
                self.stretch = self._stretch() if o.stretch == "auto" else 1.0
                self.exaggeration = o.exaggeration * self.stretch
                self._settled = True

    def _stretch(self) -> float:
        """The "auto" vertical factor, from up to SAMPLE_WINDOWS windows spread over the canvas
        read at the canvas's own cell size (decided once, before the window walk); a draft that
        reads a sample of the file's blocks: from its own cells (:meth:`_sampled_stretch`)."""
        o = self.options
        if self.sample is not None:
            return self._sampled_stretch()
        canvas = self.full if self.full is not None else self.canvas   # a draft: the full one's
        wins = list(canvas.windows(SAMPLE_SIZE, margin=self.margin))
        rows, cols = -(-canvas.height // SAMPLE_SIZE), -(-canvas.width // SAMPLE_SIZE)
        samples = []
        for i in spread_windows(rows, cols, SAMPLE_WINDOWS):
            win = wins[int(i)]
            transform = canvas.window_transform(win)
            dem = self.source.read_window(canvas, win, o.resampling)
            dx, dy = ground_cell_size(canvas.crs, transform, dem.shape[0], self.scale)
            samples.append((dem, dx, dy))
        return stretch_factor(samples, o.azimuth, o.altitude, o.directions)

    def paint(self, window, transform, height, width) -> list[Paint]:
        o = self.options
        if self.full is not None:
            shade = self.early.take(window) if self.early is not None else None
            if shade is None:
                shade = self._draft_shade(window)
        else:
            dem = self.source.read_window(self.canvas, window, o.resampling)
            dx, dy = self.metres if self.metres is not None else \
                ground_cell_size(self.canvas.crs, transform, height, self.scale)
            shade = multidirectional(dem, dx, dy, azimuth=o.azimuth, altitude=o.altitude,
                                     exaggeration=self.exaggeration, directions=o.directions)
        index, alpha = shade_levels(shade)
        return [Paint("shade", alpha, index=index, palette=self.palette)]

    def _draft_shade(self, window) -> np.ndarray:
        """A draft's shade: each draft pixel takes the shade of the full canvas's cell at its
        centre, from that cell's own 3 x 3 neighbourhood (Horn's stencil) at full resolution.

        Shading is not linear: the shade of a block-averaged DEM is much flatter than the shades
        of the block's cells (on rough terrain a 22x coarser draft halved the L* spread), so the
        draft samples the full map's shades instead of shading a smoothed DEM. Only the 3 rows
        around each draft row's centre are read (every block of the file is still decoded once,
        as a decimated read does); the 3 x 3 neighbourhoods are laid side by side and shaded in
        one call, keeping each block's centre.
        """
        o, f, full = self.options, self.factor, self.full
        assert full is not None                   # a draft of a whole-number coarser canvas
        self._settle()
        if self.sample is not None:
            return self._sampled_shade(window)
        r0, c0, h, w = window.padded
        step = np.array([-1, 0, 1])
        rows = ((r0 + np.arange(h)) * f + f // 2)[:, None] + step     # (h, 3) full-canvas rows
        cols = (((c0 + np.arange(w)) * f + f // 2)[:, None] + step).ravel()
        c_lo = int(cols.min())
        span = int(cols.max()) - c_lo + 1
        dem = np.empty((3 * h, 3 * w), np.float32)
        r_first = int(rows.min())
        r_span = int(rows.max()) - r_first + 1
        if r_span * span <= DRAFT_READ_CELLS:   # small enough: one read, then pick
            win = Window(r_first, c_lo, r_span, span, 0, full.height, full.width)
            block = self.source.read_window(full, win, o.resampling)
            dem[:] = block[np.ix_(rows.ravel() - r_first, cols - c_lo)]
        else:                   # the 3 rows around each draft row's centre (GDAL caches blocks)
            for i in range(h):
                win = Window(int(rows[i, 0]), c_lo, 3, span, 0, full.height, full.width)
                dem[3 * i:3 * i + 3] = self.source.read_window(full, win,
                                                               o.resampling)[:, cols - c_lo]
        return self._shade_centres(dem, rows.ravel())

    def _sampled_shade(self, window) -> np.ndarray:
        """:meth:`_draft_shade` from a sample of the file's blocks: each draft pixel's cell is
        the one :class:`compose.layers.early.BlockSample` gives it (a cell of a block read, in
        the pixel's own row of blocks), shaded from its own 3 x 3 neighbourhood."""
        kept, self._gathered = self._gathered, None
        if kept is not None and kept[0] == window.padded:     # the stretch's own gradient
            return self._shade_gradient(*kept[1])
        rows, _, dem = self._gather(window)
        return self._shade_centres(dem, _stencil_rows(rows))

    def _gather(self, window) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(rows, cols, dem) of a sampled draft's padded ``window``: the full-canvas cells of its
        pixels ((h, w), -1: outside) and their 3 x 3 neighbourhoods side by side ((3h, 3w))."""
        assert self.full is not None and self.sample is not None
        rows, cols = self.sample.cells(window)
        return rows, cols, self.sample.neighbourhoods(rows, cols)

    def _sampled_stretch(self) -> float:
        """A block-sampled draft's "auto" factor, measured on the full-resolution cells the draft
        shades: the Horn gradient of each distinct cell its pixels take (:meth:`_sampled_shade`,
        the early read's padded window), one sample of the blocks the draft decodes anyway,
        instead of the full check's SAMPLE_WINDOWS windows, whose blocks (16 of 512 x 512 cells
        on the 8192 benchmark) it would decode for the stretch alone. The same 95th percentile,
        estimated from another sample of the same terrain: on a DEM gentle enough to be
        stretched and rougher in one region than another, within 10 % of the full check's
        factor (tests/layers/test_early.py)."""
        window = self.canvas.whole(PAD)
        rows, cols, dem = self._gather(window)
        p, q = self._centre_gradient(dem, _stencil_rows(rows))
        self._gathered = (window.padded, (p, q))      # shaded next (_sampled_shade)
        ok = ((rows >= 0) & (cols >= 0)).ravel()
        assert self.full is not None
        cell = rows.ravel()[ok] * np.int64(self.full.width) + cols.ravel()[ok]
        _, first = np.unique(cell, return_index=True)          # each distinct cell once
        pick = np.flatnonzero(ok)[first]
        grads = [g.ravel()[pick][None, :] for g in (p, q)]
        o = self.options
        return stretch_factor(None, o.azimuth, o.altitude, o.directions,
                              gradients=[(grads[0], grads[1])])

    def _cell_sizes(self, all_rows: np.ndarray):
        """(dx, dy) ground metres of a draft's side-by-side neighbourhoods, ``all_rows`` the
        full-canvas row of each of their 3h rows (dx: a scalar, or (3h, 1) where the ground cell
        size varies with latitude)."""
        full = self.full
        assert full is not None
        r_lo = int(all_rows.min())
        dx, dy = ground_cell_size(full.crs, full.transform @ Affine.translation(0, r_lo),
                                  int(all_rows.max()) - r_lo + 1, self.scale)
        if np.ndim(dx):
            dx = np.asarray(dx).reshape(-1, 1)[all_rows - r_lo]
        return dx, dy

    def _centre_gradient(self, dem: np.ndarray, all_rows: np.ndarray
                         ) -> tuple[np.ndarray, np.ndarray]:
        """Horn's gradient (h, w) of the centres of (3h, 3w) side-by-side 3 x 3 neighbourhoods
        of full-canvas cells: what the side-by-side array's gradient has at ``[1::3, 1::3]``,
        bit for bit, computed for the centres only (:func:`centre_gradient`). ``all_rows``: the
        full-canvas row of each of the 3h rows (its ground cell size, for geographic CRSs,
        varies with latitude)."""
        h, w = dem.shape[0] // 3, dem.shape[1] // 3
        dx, dy = self._cell_sizes(all_rows)
        if np.ndim(dx):
            dx = np.asarray(dx)[1::3]
        return centre_gradient(dem.reshape(h, 3, w, 3), dx, dy)

    def _shade_centres(self, dem: np.ndarray, all_rows: np.ndarray) -> np.ndarray:
        """Shade the centres of (3h, 3w) side-by-side 3 x 3 neighbourhoods of full-canvas cells:
        (h, w) in [0, 1], the bits :func:`multidirectional` of the side-by-side array gives at
        its centres (:meth:`_centre_gradient`, :func:`shade_gradient`)."""
        return self._shade_gradient(*self._centre_gradient(dem, all_rows))

    def _shade_gradient(self, p: np.ndarray, q: np.ndarray) -> np.ndarray:
        """The shade (h, w) of cells of Horn gradient ``p``, ``q`` under the layer's suns."""
        o = self.options
        return shade_gradient(p, q, azimuth=o.azimuth, altitude=o.altitude,
                              exaggeration=self.exaggeration, directions=o.directions)

    def close(self) -> None:
        early = getattr(self, "early", None)
        if early is not None:
            early.wait()
        self.source.close()


#: Full-canvas cells a draft's relief reads in one piece (16 MB of float32); larger canvases
#: are read 3 rows per draft row.
DRAFT_READ_CELLS = 4 << 20


def _stencil_rows(rows: np.ndarray) -> np.ndarray:
    """The full-canvas row of each of the 3h rows of a sampled draft's side-by-side 3 x 3
    neighbourhoods, from its pixels' cells ``rows`` ((h, w), -1: outside the canvas)."""
    row_of = rows.max(axis=1)                               # a row's cell row (-1: outside)
    row_of = np.where(row_of >= 0, row_of, max(int(row_of.max()), 1))
    return (row_of[:, None] + np.array([-1, 0, 1])).ravel()


def _full_of_draft(context: Context) -> tuple[Canvas | None, int]:
    """(full canvas, whole-number factor) of a draft's canvas (see :mod:`compose.check.draft`),
    or (None, 1) when the canvas is not a whole-number coarser copy of the style's own."""
    full = context.style.canvas()
    draft = context.canvas
    f = draft.pixel / full.pixel
    k = int(round(f))
    if draft == full or k < 2 or abs(f - k) > 1e-9 * k or draft.crs != full.crs \
            or draft.transform.c != full.transform.c or draft.transform.f != full.transform.f:
        return None, 1
    return full, k


def spread_windows(rows: int, cols: int, count: int) -> list[int]:
    """Row-major indices of up to ``count`` windows of a ``rows`` x ``cols`` grid of windows,
    spread over both directions: a k x k lattice (k = floor(sqrt(count)), at least 1) from the
    first to the last row and column, evenly. (Evenly spaced indices of the row-major list would
    put most of them in one column: 8 of 9 in the last column of a 64 x 64 grid.)"""
    k = max(1, int(np.sqrt(count)))
    pick_rows = np.unique(np.linspace(0, rows - 1, min(k, rows)).round().astype(int))
    pick_cols = np.unique(np.linspace(0, cols - 1, min(k, cols)).round().astype(int))
    return [int(r * cols + c) for r in pick_rows for c in pick_cols]
