"""The render pipeline, in stages: resolve -> prepare layers -> for each window (read, colour,
blend, measure) -> hand finished rows to sinks.

Windows are processed band by band (a band is one row of windows), so a sink (PNG, GeoTIFF,
proofs) receives complete rows north to south and memory scales with the window, not the canvas.
Statistics of every window merge by addition into :class:`compose.check.stats.Statistics`.
"""
from __future__ import annotations

import contextlib
import time
from dataclasses import dataclass, field
from typing import Callable, Protocol

import numpy as np

from compose.canvas import Canvas, Window
from compose.check.stats import (N_BENEATH, N_CONTRAST, N_LIGHTNESS, LayerStats, PartStats,
                                 Statistics, beneath_color_codes, contrast_bins,
                                 lightness_bins_of_rgb8, luminance_of_rgb8)
from compose.color.wcag import relative_luminance
from compose.composite import composite_over
from compose.layers import layer_class
from compose.layers.base import Context, Paint

__all__ = ["Sink", "RenderRun", "prepare", "run", "render_window", "ArraySink", "preview_canvas",
           "render_array", "WINDOW"]

WINDOW = 1024  # core pixels per window side
GRAY_STRIDE = 2  # the grey-order histogram samples every 2nd row and column


class Sink(Protocol):
    """Receives finished output rows: ``rows(row0, rgb8)`` with rgb8 (n, width, 3) uint8."""

    def rows(self, row0: int, rgb8: np.ndarray) -> None: ...


@dataclass
class RenderRun:
    """The prepared render: canvas, built ramps and open layer objects (close when done)."""

    style: object
    canvas: Canvas
    ramps: dict
    layers: list
    stack: contextlib.ExitStack
    seconds: dict[str, float] = field(default_factory=dict)

    @property
    def unplaced_labels(self) -> dict[str, list[str]]:
        return {layer.spec.name: layer.unplaced for layer in self.layers if hasattr(layer, "unplaced")
                and layer.unplaced}

    def close(self) -> None:
        self.stack.close()


def prepare(style, ramps: dict | None = None, canvas: Canvas | None = None) -> RenderRun:
    """Resolve the canvas, build ramps and open every enabled layer's sources.

    ``canvas`` overrides the style's own (e.g. a small preview of the same extent, see
    :func:`preview_canvas`).
    """
    from compose.ramps import build_ramps

    t0 = time.perf_counter()
    canvas = canvas if canvas is not None else style.canvas()
    if ramps is None:   # only the ramps the enabled layers draw (and their twin groups)
        used = {getattr(spec.options, "ramp", None) for spec in style.layers if spec.enabled}
        ramps = build_ramps(style.ramps, only={u for u in used if isinstance(u, str)})
    ctx = Context(canvas=canvas, ramps=ramps, style=style)
    stack = contextlib.ExitStack()
    layers = []
    try:
        for spec in style.layers:
            if not spec.enabled:
                continue
            layer = layer_class(spec.kind)(spec, ctx)
            stack.callback(layer.close)
            layers.append(layer)
    except BaseException:
        stack.close()
        raise
    run_ = RenderRun(style=style, canvas=canvas, ramps=ramps, layers=layers, stack=stack)
    run_.seconds["prepare"] = time.perf_counter() - t0
    return run_


def _new_stats(run_: RenderRun) -> Statistics:
    layers = []
    for layer in run_.layers:
        s = LayerStats(name=layer.spec.name, role=layer.spec.role, kind=layer.spec.kind)
        palette = getattr(layer, "palette", None)
        if palette is not None and layer.spec.role == "theme":
            s.values = palette.values.copy()
            s.value_lightness = np.zeros((palette.rgb8.shape[0], N_LIGHTNESS))
            s.nodata_index = int(palette.nodata)
        layers.append(s)
    bg = tuple(run_.style.map.background)
    return Statistics(width=run_.canvas.width, height=run_.canvas.height, layers=layers, background=bg)


def _core_pixels(alpha: np.ndarray, inner) -> np.ndarray:
    """Flat indices into the padded window of the core pixels a paint covers (alpha > 0).

    Gathering with ``np.take`` on these is 2-4x faster than boolean-mask indexing of the core
    views (which are not contiguous).
    """
    m = alpha > 0
    rs, cs = inner
    m[:rs.start] = False
    m[rs.stop:] = False
    m[:, :cs.start] = False
    m[:, cs.stop:] = False
    return np.flatnonzero(m)


def _take8(planes: np.ndarray, idx: np.ndarray) -> np.ndarray:
    """Pixels ``idx`` (flat) of contiguous float or uint8 planes (3, h, w) -> (n, 3) uint8."""
    out = np.empty((idx.size, 3), dtype=np.uint8)
    for c in range(3):
        v = np.take(planes[c].reshape(-1), idx)
        if v.dtype != np.uint8:
            v *= np.float32(255)
            np.rint(v, out=v)
            np.clip(v, 0, 255, out=v)
        out[:, c] = v
    return out


def _contrast_hist(y_part: float, y_below: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Weighted histogram (N_CONTRAST,) of the WCAG contrast of a colour against luminances."""
    y = y_below.astype(np.float64)
    ratio = (np.maximum(y, y_part) + 0.05) / (np.minimum(y, y_part) + 0.05)
    return np.bincount(contrast_bins(ratio), weights=weights, minlength=N_CONTRAST)


def _measure_part(stats: LayerStats, paint: Paint, alpha: np.ndarray, beneath: np.ndarray | None,
                  ground8: np.ndarray | None, overlay: bool, inner) -> None:
    """Add one paint of one window (core region) to the layer's statistics.

    alpha: the paint's coverage x opacity over the padded window; beneath: the padded composite
    just before this paint; ground8: a copy of the padded composite under the whole layer (None
    for the layer's first paint, where it equals ``beneath``); both measured as 8-bit colours.
    """
    alpha_core = alpha[inner]
    if paint.palette is not None:
        idx = paint.index[inner].ravel()
        n = paint.palette.rgb8.shape[0]
        if alpha_core.min() >= 1.0:     # opaque: an unweighted count is ~3x faster
            w = np.bincount(idx, minlength=n)
        else:
            w = np.bincount(idx, weights=alpha_core.ravel(), minlength=n)
        part = PartStats(paint.part, paint.palette.rgb8, w.astype(float))
        if paint.palette.nodata >= 0:
            stats.nodata_weight += float(w[paint.palette.nodata])
    else:
        rgb8 = np.clip(np.rint(np.asarray(paint.color) * 255), 0, 255).astype(np.uint8)[None, :]
        part = PartStats(paint.part, rgb8, np.array([float(alpha_core.sum())]))
    if overlay and paint.palette is None:
        pix = _core_pixels(alpha, inner)
        if pix.size:
            # what lies beneath, as 8-bit colours; luminance and L* by lookup tables
            weights = np.take(alpha.reshape(-1), pix)
            below8 = _take8(beneath, pix)
            y_part = float(relative_luminance(np.asarray(paint.color)))
            part.contrast = _contrast_hist(y_part, luminance_of_rgb8(below8), weights)
            if ground8 is not None:
                part.ground_contrast = _contrast_hist(
                    y_part, luminance_of_rgb8(_take8(ground8, pix)), weights)
            else:                       # the layer's first part: beneath is the ground
                part.ground_contrast = part.contrast.copy()
            lb = lightness_bins_of_rgb8(below8)
            part.beneath_lightness = np.bincount(lb, weights=weights, minlength=N_LIGHTNESS)
            part.beneath_colors = np.bincount(beneath_color_codes(below8), weights=weights,
                                              minlength=N_BENEATH)
    if paint.part in stats.parts:
        stats.parts[paint.part].merge(part)
    else:
        stats.parts[paint.part] = part


def render_window(run_: RenderRun, window: Window, stats: Statistics | None,
                  only: frozenset[int] | None = None) -> np.ndarray:
    """Render one window; returns its core as uint8 (h, w, 3) and adds to ``stats``.

    ``only``: indices of the layers to draw (default all), for per-layer previews.
    """
    canvas = run_.canvas
    r0, c0, h, w = window.padded
    transform = canvas.window_transform(window)
    inner = window.inner
    bg = np.asarray(run_.style.map.background, dtype=np.float32).reshape(3, 1, 1)
    out = np.empty((3, h, w), dtype=np.float32)
    out[...] = bg
    themes = []
    hidden = None   # (core) how much overlays cover each pixel: those pixels do not show a theme
    for li, layer in enumerate(run_.layers):
        if only is not None and li not in only:
            continue
        spec = layer.spec
        paints = layer.paint(window, transform, h, w)
        if not paints:
            continue
        overlay = spec.role == "overlay"
        # the ground under the whole layer, for the parts after the first
        ground = out.copy() if (stats is not None and overlay and len(paints) > 1) else None
        union = None
        for pi, paint in enumerate(paints):
            alpha = paint.alpha if spec.opacity >= 1 else paint.alpha * np.float32(spec.opacity)
            if stats is not None:
                a_core = alpha[inner]
                union = a_core.copy() if union is None else np.maximum(union, a_core)
                _measure_part(stats.layers[li], paint, alpha, out if overlay else None,
                              ground if pi else None, overlay, inner)
                if spec.role == "theme" and paint.palette is not None:
                    themes.append((li, paint.index[inner], a_core))
            composite_over(out, paint.planes(), alpha, spec.blend, out=out)
        if stats is not None and union is not None:
            stats.layers[li].covered += float(union.sum())
            if overlay:
                hidden = union if hidden is None else np.maximum(hidden, union)
    core = out[(slice(None),) + inner]
    np.clip(core, 0, 1, out=core)
    core *= np.float32(255)
    np.rint(core, out=core)
    rgb8 = np.empty(core.shape[1:] + (3,), dtype=np.uint8)
    for c in range(3):
        rgb8[..., c] = core[c]
    themes = [t for t in themes if stats is not None and stats.layers[t[0]].value_lightness is not None]
    if themes:
        # Grey order is a rank correlation: every second row and column (a quarter of the
        # pixels, on the canvas's own even grid so windows agree) estimates it as well.
        r_off, c_off = (window.row % 2), (window.col % 2)
        sub = (slice(r_off, None, GRAY_STRIDE), slice(c_off, None, GRAY_STRIDE))
        lightness = lightness_bins_of_rgb8(np.ascontiguousarray(rgb8[sub]).reshape(-1, 3))
        shown = None if hidden is None else hidden[sub].ravel() < 0.02
        for li, index, a_core in themes:
            s = stats.layers[li]
            keep = a_core[sub].ravel() > 0.5
            if shown is not None:   # grey order is judged where the theme shows, not under lines
                keep &= shown
            n = s.value_lightness.shape[0]
            cell = index[sub].ravel().astype(np.int32) * N_LIGHTNESS + lightness
            if not keep.all():
                cell = cell[keep]
            s.value_lightness += np.bincount(cell, minlength=n * N_LIGHTNESS).reshape(n, N_LIGHTNESS)
    return rgb8


def run(run_: RenderRun, sinks: list[Sink], *, measure: bool = True, window: int = WINDOW,
        progress: Callable[[int, int], None] | None = None,
        only: frozenset[int] | None = None) -> Statistics | None:
    """Render every window band by band, feed sinks, return merged statistics.

    ``only``: indices into ``run_.layers`` to draw (default all).
    """
    canvas = run_.canvas
    margin = max([getattr(layer, "margin", 0) for layer in run_.layers] + [0])
    windows = list(canvas.windows(window, margin=margin))
    stats = _new_stats(run_) if measure else None
    t0 = time.perf_counter()
    encode = 0.0
    done = 0
    band_row = 0
    band = None

    def feed(row0, rows):
        nonlocal encode
        t = time.perf_counter()
        for sink in sinks:
            sink.rows(row0, rows)
        encode += time.perf_counter() - t

    for win in windows:
        if band is None or win.row != band_row:
            if band is not None:
                feed(band_row, band)
            band_row = win.row
            band = np.empty((win.height, canvas.width, 3), dtype=np.uint8)
        band[:, win.col:win.col + win.width] = render_window(run_, win, stats, only)
        done += 1
        if progress is not None:
            progress(done, len(windows))
    if band is not None:
        feed(band_row, band)
    run_.seconds["encode"] = encode
    run_.seconds["compute"] = time.perf_counter() - t0 - encode
    return stats


class ArraySink:
    """Collects the whole image in memory (for previews and tests of small canvases)."""

    def __init__(self, canvas: Canvas):
        self.image = np.zeros((canvas.height, canvas.width, 3), dtype=np.uint8)

    def rows(self, row0: int, rgb8: np.ndarray) -> None:
        self.image[row0:row0 + rgb8.shape[0]] = rgb8


def preview_canvas(canvas: Canvas, max_side: int = 1200) -> Canvas:
    """The same extent at a coarser pixel so the longer side is at most ``max_side`` pixels;
    the dpi is scaled with it so strokes and labels keep their size relative to the map."""
    factor = max(canvas.width, canvas.height) / max_side
    if factor <= 1:
        return canvas
    west, south, east, north = canvas.bounds
    return Canvas.from_extent(canvas.crs, (west, south, east, north), canvas.pixel * factor,
                              dpi=canvas.dpi / factor)


def render_array(style, *, canvas: Canvas | None = None, only: frozenset[int] | None = None,
                 measure: bool = False, ramps: dict | None = None):
    """Render ``style`` (or some of its layers) into memory: (uint8 (H, W, 3), statistics)."""
    run_ = prepare(style, ramps=ramps, canvas=canvas)
    try:
        sink = ArraySink(run_.canvas)
        stats = run(run_, [sink], measure=measure, only=only)
        return sink.image, stats
    finally:
        run_.close()
