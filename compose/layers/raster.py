"""Thematic raster layers: ``field`` (continuous values through a ramp) and ``classes``
(integer categories through a qualitative ramp). Values -> lookup-table index -> colour."""
from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from compose.canvas import core_window
from compose.errors import StyleError
from compose.kernels import get as compiled
from compose.layers.base import Context, Paint, palette_from_lut
from compose.layers.early import BlockSample, EarlyRead

if TYPE_CHECKING:
    from compose.sources.raster import RasterSource

__all__ = ["FieldLayer", "ClassesLayer", "palette_from_lut", "open_raster", "lut_index"]


def open_raster(spec, canvas, *, decimate: bool = False, full=None) -> RasterSource:
    """Open a raster layer's source (its ``band``) and check it overlaps the canvas
    (``decimate``: a draft's faster reads, see :class:`RasterSource`). A draft's large plain
    GeoTIFF aligned with the ``full`` canvas is read without GDAL
    (:func:`compose.layers.early_tiff.plain_source`: rasterio is then not imported for it)."""
    if decimate and full is not None:
        from compose.layers.early_tiff import plain_source

        plain = plain_source(spec, canvas, full)
        if plain is not None:
            return plain  # type: ignore[return-value]   # what a draft asks of a RasterSource
    from compose.sources.raster import RasterSource

    source = RasterSource(spec.source, spec.options.band, layer=spec.name, decimate=decimate)
    try:
        source.check_overlap(canvas)
    except BaseException:
        source.close()
        raise
    return source


def _block_sample(source: RasterSource, context: Context) -> BlockSample | None:
    """A draft's :class:`BlockSample` of ``source``, or None (see :meth:`BlockSample.of`)."""
    full = context.style.canvas()
    draft = context.canvas
    factor = draft.pixel / full.pixel
    k = int(round(factor))
    if draft.crs != full.crs or k < 2 or abs(factor - k) > 1e-9 * k \
            or (draft.transform.c, draft.transform.f) != (full.transform.c, full.transform.f):
        return None
    return BlockSample.of(source, draft, full, k)


def lut_index(lut, values: np.ndarray) -> np.ndarray:
    """``lut.index(values)`` as uint16 (:meth:`compose.ramps.lut.Lut.index`): for a continuous
    or stepped table and a 2-D float array, by the compiled kernel (:mod:`compose.kernels`) in
    one pass, the same float64 steps value by value, so the same indices."""
    kernel = compiled()
    v = np.asarray(values)
    if kernel is not None and lut.kind != "qualitative" and v.ndim == 2 \
            and v.dtype in (np.float32, np.float64) and 1 <= lut.n <= 65533 \
            and (lut.width is None or lut.width > 0):
        index = np.empty(v.shape, np.uint16)
        edges = np.ascontiguousarray(lut.edges, dtype=np.float64)
        at, first, width2 = lut.split if lut.split is not None else (0.0, -1, 1.0)
        even = lut.width is not None
        kernel.lut_index(v, index, float(edges[0]), float(edges[-1]), lut.n,
                         float(lut.origin) if even else 0.0, float(lut.width) if even else 0.0,
                         None if even else edges[1:-1], float(at), int(first), float(width2))
        return index
    return lut.index(values).astype(np.uint16, copy=False)


class FieldLayer:
    """Continuous values coloured through a ramp; no-data in its own colour or transparent."""

    margin = 1

    def __init__(self, spec, context: Context):
        self.spec = spec
        o = spec.options
        self.options = o
        self.canvas = context.canvas
        if o.ramp not in context.ramps:
            raise StyleError(f'layer "{spec.name}": unknown ramp \'{o.ramp}\'; ramps: '
                             + ", ".join(sorted(context.ramps)))
        self.ramp = context.ramps[o.ramp]
        self.source = open_raster(spec, self.canvas, decimate=context.draft,
                                  full=context.style.canvas() if context.draft else None)
        self.lut = self._lut()
        nodata = getattr(o, "nodata", None)
        self.transparent_nodata = isinstance(nodata, str) and nodata == "transparent"
        self.palette = palette_from_lut(self.lut, None if (nodata is None or self.transparent_nodata)
                                        else nodata)
        #: each pixel's colour depends on its own value only, so a window's margin (which the
        #: window paints but never writes out) needs no source cells: on a grid aligned with
        #: the source only the core is read and the margin is no-data. Then no source block is
        #: needed by two rows of windows, and a planned walk (compose.sources.blocks) holds
        #: none of this raster's blocks beyond the windows in flight.
        self.core_reads = not context.draft and self.source.aligned_with(self.canvas)
        # a draft of a large file without overviews reads a sample of its blocks instead of
        # decimating all of them (compose.layers.early.BlockSample)
        self.sample = _block_sample(self.source, context) if context.draft else None
        # a draft's decimated read runs beside the rest of the preparation (compose.layers.early)
        self.early = EarlyRead(self.canvas, self._read, self.source) if context.draft else None

    def _read(self, window) -> np.ndarray:
        if self.sample is not None:
            return self.sample.values(window)
        if self.core_reads and window.margin:
            core = self.source.read_window(self.canvas, core_window(window),
                                           self.options.resampling)
            _, _, h, w = window.padded
            values = np.full((h, w), np.nan, dtype=np.float32)
            values[window.inner] = core
            return values
        return self.source.read_window(self.canvas, window, self.options.resampling)

    def _lut(self):
        """The ramp's lookup table; quantile steps get their breaks from this layer's data,
        sampled on a coarse copy of the canvas (at most 1024 px a side)."""
        lut = self.ramp.lut()
        if getattr(lut, "quantile_pending", False):
            coarse = self.canvas.coarser(1024)
            values = self.source.read(coarse.crs, coarse.transform, coarse.width, coarse.height,
                                      self.options.resampling)
            lut = lut.with_quantile_breaks(values[np.isfinite(values)])
        return lut

    def paint(self, window, transform, height, width) -> list[Paint]:
        values = self.early.take(window) if self.early is not None else None
        if values is None and self.sample is None and self.core_reads and window.margin:
            # only the core read and indexed; the margin is no-data, as a NaN gives (the
            # index of :meth:`_read`'s values, without filling and copying them first)
            core = self.source.read_window(self.canvas, core_window(window),
                                           self.options.resampling)
            index = np.full((height, width), self.lut.nodata_index, np.uint16)
            index[window.inner] = lut_index(self.lut, core)
        else:
            if values is None:
                values = self._read(window)
            index = lut_index(self.lut, values)
        if self.transparent_nodata:
            alpha = (index != self.lut.nodata_index).astype(np.float32)
        else:
            alpha = np.ones(index.shape, dtype=np.float32)
        return [Paint("data", alpha, index=index, palette=self.palette,
                      opaque=not self.transparent_nodata)]

    def close(self) -> None:
        early = getattr(self, "early", None)
        if early is not None:
            early.wait()
        self.source.close()


class ClassesLayer(FieldLayer):
    """Integer categories coloured through a qualitative ramp; unknown values are no-data."""
