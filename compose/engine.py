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
                                 Statistics, beneath_color_codes, contrast_bins, lightness_of_rgb8,
                                 luminance_of_planes)
from compose.color.wcag import relative_luminance
from compose.composite import composite_over
from compose.layers import layer_class
from compose.layers.base import Context, Paint

__all__ = ["Sink", "RenderRun", "prepare", "run", "WINDOW"]

WINDOW = 1024  # core pixels per window side


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


def prepare(style, ramps: dict | None = None) -> RenderRun:
    """Resolve the canvas, build ramps and open every enabled layer's sources."""
    from compose.ramps import build_ramps

    t0 = time.perf_counter()
    canvas = style.canvas()
    if ramps is None:
        ramps = build_ramps(style.ramps)
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


def _measure_part(stats: LayerStats, paint: Paint, alpha_core: np.ndarray, beneath_core: np.ndarray,
                  ground_core: np.ndarray | None, overlay: bool, inner) -> None:
    """Add one paint of one window (core region) to the layer's statistics."""
    if paint.palette is not None:
        idx = paint.index[inner]
        w = np.bincount(idx.ravel(), weights=alpha_core.ravel(), minlength=paint.palette.rgb8.shape[0])
        part = PartStats(paint.part, paint.palette.rgb8, w.astype(float))
        if paint.palette.nodata >= 0:
            stats.nodata_weight += float(w[paint.palette.nodata])
    else:
        rgb8 = np.clip(np.rint(np.asarray(paint.color) * 255), 0, 255).astype(np.uint8)[None, :]
        part = PartStats(paint.part, rgb8, np.array([float(alpha_core.sum())]))
    if overlay and paint.palette is None:
        mask = alpha_core > 0
        if mask.any():
            weights = alpha_core[mask]
            y_part = float(relative_luminance(np.asarray(paint.color)))
            y_below = luminance_of_planes(beneath_core[:, mask])
            lo, hi = np.minimum(y_part, y_below), np.maximum(y_part, y_below)
            part.contrast = np.bincount(contrast_bins((hi + 0.05) / (lo + 0.05)), weights=weights,
                                        minlength=N_CONTRAST)
            if ground_core is not None:
                y_ground = luminance_of_planes(ground_core[:, mask])
                lo, hi = np.minimum(y_part, y_ground), np.maximum(y_part, y_ground)
                part.ground_contrast = np.bincount(contrast_bins((hi + 0.05) / (lo + 0.05)),
                                                   weights=weights, minlength=N_CONTRAST)
            below8 = np.clip(np.rint(beneath_core[:, mask].T * 255), 0, 255).astype(np.uint8)
            lb = np.clip(np.rint(lightness_of_rgb8(below8)), 0, 100).astype(np.int64)
            part.beneath_lightness = np.bincount(lb, weights=weights, minlength=N_LIGHTNESS)
            part.beneath_colors = np.bincount(beneath_color_codes(below8), weights=weights,
                                              minlength=N_BENEATH)
    if paint.part in stats.parts:
        stats.parts[paint.part].merge(part)
    else:
        stats.parts[paint.part] = part


def render_window(run_: RenderRun, window: Window, stats: Statistics | None) -> np.ndarray:
    """Render one window; returns its core as uint8 (h, w, 3) and adds to ``stats``."""
    canvas = run_.canvas
    r0, c0, h, w = window.padded
    transform = canvas.window_transform(window)
    inner = window.inner
    bg = np.asarray(run_.style.map.background, dtype=np.float32).reshape(3, 1, 1)
    out = np.empty((3, h, w), dtype=np.float32)
    out[...] = bg
    themes = []
    for li, layer in enumerate(run_.layers):
        spec = layer.spec
        paints = layer.paint(window, transform, h, w)
        if not paints:
            continue
        overlay = spec.role == "overlay"
        ground = out[(slice(None),) + inner].copy() if (stats is not None and overlay) else None
        union = None
        for paint in paints:
            alpha = paint.alpha if spec.opacity >= 1 else paint.alpha * np.float32(spec.opacity)
            if stats is not None:
                a_core = alpha[inner]
                union = a_core.copy() if union is None else np.maximum(union, a_core)
                beneath = out[(slice(None),) + inner] if overlay else None
                _measure_part(stats.layers[li], paint, a_core, beneath, ground, overlay, inner)
                if spec.role == "theme" and paint.palette is not None:
                    themes.append((li, paint.index[inner], a_core))
            composite_over(out, paint.planes(), alpha, spec.blend, out=out)
        if stats is not None and union is not None:
            stats.layers[li].covered += float(union.sum())
    core = out[(slice(None),) + inner]
    rgb8 = np.empty(core.shape[1:] + (3,), dtype=np.uint8)
    for c in range(3):
        np.rint(np.clip(core[c], 0, 1) * 255, out=core[c])
        rgb8[..., c] = core[c]
    if stats is not None:
        lightness = np.clip(np.rint(lightness_of_rgb8(rgb8.reshape(-1, 3))), 0, 100).astype(np.int64)
        stats.composite_lightness += np.bincount(lightness, minlength=N_LIGHTNESS)
        for li, index, a_core in themes:
            s = stats.layers[li]
            if s.value_lightness is None:
                continue
            keep = (a_core.ravel() > 0.5)
            n = s.value_lightness.shape[0]
            cell = index.ravel()[keep].astype(np.int64) * N_LIGHTNESS + lightness[keep]
            s.value_lightness += np.bincount(cell, minlength=n * N_LIGHTNESS).reshape(n, N_LIGHTNESS)
    return rgb8


def run(run_: RenderRun, sinks: list[Sink], *, measure: bool = True, window: int = WINDOW,
        progress: Callable[[int, int], None] | None = None) -> Statistics | None:
    """Render every window band by band, feed sinks, return merged statistics."""
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
        band[:, win.col:win.col + win.width] = render_window(run_, win, stats)
        done += 1
        if progress is not None:
            progress(done, len(windows))
    if band is not None:
        feed(band_row, band)
    run_.seconds["encode"] = encode
    run_.seconds["compute"] = time.perf_counter() - t0 - encode
    return stats
