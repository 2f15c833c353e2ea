"""Measuring a window: the statistics sink the engine calls while it composites.

The engine tells a :class:`WindowMeasure` what it does (a layer starts, a paint is about to be
composited over what lies beneath, a layer ends, the window is finished); the measure turns that
into a :class:`compose.check.stats.Statistics` of the window alone. Statistics of windows merge
by addition (:meth:`Statistics.merge`), so windows can be measured in any process and summed in
order. Nothing here converts pixels through a colour library: raster paints are counted by
lookup-table index, flat colours by coverage, and what lies beneath an overlay by 8-bit colour
through lookup tables (:mod:`compose.check.stats`).

What is measured depends on the layer's role and its kind's measurement (see
:mod:`compose.kinds`): ``"palette"`` kinds are counted by table entry (and themes also by value
against the composite's L*, for the grey-order rule); ``"ink"`` kinds by coverage of each flat
colour, and as overlays by the contrast against what lies beneath.
"""
from __future__ import annotations

import functools
import math
import threading
from typing import Any

import numpy as np

from compose.check.stats import (  # the Y -> L* table and its size
    _L_BIN,
    _Y_LEVELS,
    BENEATH_BITS,
    CONTRAST_STEP,
    N_BENEATH,
    N_CONTRAST,
    N_LIGHTNESS,
    LayerStats,
    PartStats,
    Statistics,
    gray_stride,
)
from compose.color.bulk import CHANNEL_XYZ
from compose.color.srgb import srgb_to_linear
from compose.color.wcag import relative_luminance
from compose.composite import composite_flat_gathering
from compose.kernels import get as compiled
from compose.style.kinds import LAYER_KINDS

__all__ = ["new_statistics", "WindowMeasure"]
# linear-light value of each 8-bit sRGB code (IEC 61966-2-1 decoding, compose.color.srgb)
_LINEAR8 = srgb_to_linear(np.arange(256) / 255.0)

_local = threading.local()


def _scratch(name: str, shape: tuple[int, ...], dtype) -> np.ndarray:
    """A buffer of this thread kept across windows (contents undefined): a window's large
    temporaries reuse the same pages instead of faulting fresh ones in (a few MB per thread).
    Never part of a result."""
    bufs = _local.__dict__.setdefault("bufs", {})
    n = math.prod(shape)
    buf = bufs.get(name)
    if buf is None or buf.size < n or buf.dtype != dtype:
        buf = bufs[name] = np.empty(n, dtype)
    return buf[:n].reshape(shape)


def _intp_of(a: np.ndarray) -> np.ndarray:
    """``a`` (any layout, integers) as a contiguous intp (n,) scratch array: what np.bincount
    would convert it to, without a fresh allocation per call."""
    out = _scratch("intp", a.shape, np.intp)
    np.copyto(out, a, casting="unsafe")
    return out.reshape(-1)


def _float64_of(a: np.ndarray) -> np.ndarray:
    """``a`` (any layout, float32) as a contiguous float64 (n,) scratch array (exact: every
    float32 is a float64), the weights np.bincount would convert it to."""
    out = _scratch("f64", a.shape, np.float64)
    np.copyto(out, a)
    return out.reshape(-1)


def new_statistics(layers: list, width: int, height: int,
                   background: tuple[float, float, float]) -> Statistics:
    """Empty statistics of a render of ``layers`` (prepared layer objects, drawing order) on a
    ``width`` x ``height`` canvas; the template every window's statistics start from."""
    out = []
    for layer in layers:
        kind = LAYER_KINDS[layer.spec.kind]
        s = LayerStats(name=layer.spec.name, role=layer.spec.role, kind=layer.spec.kind,
                       figure=kind.figure, outline=kind.outline)
        palette = getattr(layer, "palette", None)
        if palette is not None and layer.spec.role == "theme":
            s.values = palette.values.copy()
            s.value_lightness = np.zeros((palette.rgb8.shape[0], N_LIGHTNESS))
            s.value_color = np.zeros((palette.rgb8.shape[0], 3))
            s.value_count = np.zeros(palette.rgb8.shape[0])
            s.nodata_index = int(palette.nodata)
        out.append(s)
    r, g, b = (float(v) for v in background)
    return Statistics(width=width, height=height, layers=out, background=(r, g, b))


def _core_pixels(alpha: np.ndarray, inner) -> np.ndarray:
    """Flat indices into the padded window of the core pixels a paint covers (alpha > 0).

    Gathering with ``np.take`` on these is 2-4x faster than boolean-mask indexing of the core
    views (which are not contiguous).
    """
    m = np.greater(alpha, 0, out=_scratch("mask", alpha.shape, np.bool_))
    rs, cs = inner
    m[:rs.start] = False
    m[rs.stop:] = False
    m[:, :cs.start] = False
    m[:, cs.stop:] = False
    return np.flatnonzero(m)


def _take8(planes: np.ndarray, idx: np.ndarray, name: str = "take8") -> np.ndarray:
    """Pixels ``idx`` (flat, in range) of contiguous float or uint8 planes (3, h, w) -> (3, n)
    uint8, each channel contiguous: a scratch array of this thread under ``name``."""
    out = _scratch(name, (3, idx.size), np.uint8)
    v = _scratch("take8-v", (idx.size,), planes.dtype)
    for c in range(3):
        if planes.dtype == np.uint8:
            np.take(planes[c].reshape(-1), idx, out=out[c], mode="clip")   # in range
            continue
        np.take(planes[c].reshape(-1), idx, out=v, mode="clip")    # in range: as "raise"
        v *= np.float32(255)
        np.clip(v, 0, 255, out=v)       # then rounded: the same as rounded, then clipped
        np.rint(v, out=out[c], casting="unsafe")
    return out


def _luminance8(planes8: np.ndarray) -> np.ndarray:
    """WCAG relative luminance (float32 (n,)) of 8-bit sRGB planes (3, n), by lookup tables: the
    same sums as :func:`compose.check.stats.luminance_of_rgb8` of the pixels."""
    # "wrap" equals "clip" for 8-bit indices into 256 entries; no copy of the indices first
    y = np.take(CHANNEL_XYZ[1, 0], planes8[0], mode="wrap")
    y += np.take(CHANNEL_XYZ[1, 1], planes8[1], mode="wrap")
    y += np.take(CHANNEL_XYZ[1, 2], planes8[2], mode="wrap")
    return y


def _beneath_codes(planes8: np.ndarray) -> np.ndarray:
    """:func:`compose.check.stats.beneath_color_codes` of 8-bit sRGB planes (3, n)."""
    shift = 8 - BENEATH_BITS
    n = planes8.shape[1]
    codes = _scratch("codes", (n,), np.intp)
    part = _scratch("codes-c", (n,), np.uint8)
    np.right_shift(planes8[0], shift, out=part)
    codes[:] = part
    for c in (1, 2):
        codes <<= BENEATH_BITS
        np.right_shift(planes8[c], shift, out=part)
        codes |= part
    return codes


def _present(codes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The distinct beneath-colour ``codes`` ((n,) intp in [0, N_BENEATH)), ascending, and each
    code's place among them ((n,) intp): a sort-free ``np.unique(codes, return_inverse=True)``
    by marks in a table of this thread."""
    seen = _local.__dict__.get("seen")
    if seen is None:                    # all zeros between calls
        seen = _local.seen = np.zeros(N_BENEATH, np.uint8)
    seen[codes] = 1
    # the marked bins, ascending: first the 8-byte words holding any, then their bytes
    words = np.flatnonzero(seen.view(np.uint64))
    marks = np.flatnonzero(seen.reshape(-1, 8)[words])
    present = words[marks >> 3] * 8 + (marks & 7)
    seen[present] = 0
    slot = _scratch("slot", (N_BENEATH,), np.intp)
    slot[present] = np.arange(present.size)
    return present, np.take(slot, codes, out=_scratch("slots", codes.shape, np.intp), mode="clip")


def _beneath_hist(codes: np.ndarray, weights: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The weighted histogram of beneath-colour ``codes`` (n,) as its non-empty bins: (codes
    present, ascending; their summed weights) -- each bin the sum of the same weights in the
    same order as ``np.bincount(codes, weights, minlength=N_BENEATH)`` adds them, without that
    2 MB array of mostly zeros."""
    present, slots = _present(codes)
    return present, np.bincount(slots, weights=weights, minlength=present.size)


def _sums_exact(weights: np.ndarray) -> bool:
    """True when every sum of any of these weights (float64 (n,) > 0 holding float32 values),
    added in any order, is exact in float64, so sums grouped differently have the same bits.
    Every float32 at or above the smallest weight is a whole multiple of that weight's float32
    spacing u (IEEE 754 binary32: 24-bit significands), so every partial sum is too; below
    n x max / u < 2**53 each is representable exactly (binary64: 53-bit significands). Coverage
    of 8-bit steps (>= 1/255, u = 2**-31) on a 512 px window leaves a margin of 2**4."""
    lowest = float(weights.min())
    u = 2.0 ** (np.frexp(np.float32(lowest))[1] - 24)
    return lowest > 0 and weights.size * float(weights.max()) < u * 2.0 ** 53


def _overlay_by_color(part: PartStats, y_part: float, below8: np.ndarray,
                       weights: np.ndarray) -> None:
    """The beneath histograms of an overlay part (contrast, L*, colours) from the distinct
    8-bit colours beneath it: pixels are grouped by colour first (the beneath-colour code's
    place, then the two low bits per channel), each colour's weights summed, and the
    histograms made from a few thousand colours instead of every pixel. Only for weights whose
    sums are exact in any order (:func:`_sums_exact`): then every bin is the same float64 as
    summing pixel by pixel."""
    present, slots = _present(_beneath_codes(below8))
    n = below8.shape[1]
    low, part_ = _scratch("low", (n,), np.uint8), _scratch("low-c", (n,), np.uint8)
    np.bitwise_and(below8[0], 3, out=low)
    low <<= 4
    np.bitwise_and(below8[1], 3, out=part_)
    part_ <<= 2
    low |= part_
    np.bitwise_and(below8[2], 3, out=part_)
    low |= part_
    key = slots                         # this thread's scratch: ours to change
    key <<= 6
    key += low
    per_key = np.bincount(key, weights=weights, minlength=present.size << 6)
    keys = np.flatnonzero(per_key)      # weights > 0: exactly the colours there
    w = per_key[keys]
    slot = keys >> 6
    code, low_k = present[slot], keys & 63
    shift = 8 - BENEATH_BITS
    mask = (1 << BENEATH_BITS) - 1
    colors = np.empty((3, keys.size), np.uint8)
    colors[0] = (((code >> (2 * BENEATH_BITS)) & mask) << shift) | (low_k >> 4)
    colors[1] = (((code >> BENEATH_BITS) & mask) << shift) | ((low_k >> 2) & 3)
    colors[2] = ((code & mask) << shift) | (low_k & 3)
    y = _luminance8(colors)
    part.contrast = np.bincount(_contrast_bins(y_part, y), weights=w, minlength=N_CONTRAST)
    part.beneath_lightness = np.bincount(np.take(_cell_bounds()[2], _cells(y)), weights=w,
                                         minlength=N_LIGHTNESS)
    part.add_beneath(present, np.bincount(slot, weights=w, minlength=present.size))


@functools.lru_cache(maxsize=256)
def _luminance_of(color: tuple) -> float:
    """WCAG relative luminance of a flat colour (sRGB floats), remembered."""
    return float(relative_luminance(np.asarray(color)))


def _contrast_bins(y_part: float, y_below: np.ndarray) -> np.ndarray:
    """Bin (intp (n,)) of the WCAG 2 contrast ratio of a colour of luminance ``y_part`` against
    luminances ``y_below`` (float32 (n,)): the arithmetic of
    :func:`compose.check.stats.contrast_bins`, in float64, in place."""
    y = y_below.astype(np.float64)
    ratio = np.maximum(y, y_part)
    ratio += 0.05
    np.minimum(y, y_part, out=y)
    y += 0.05
    ratio /= y
    ratio -= 1.0
    ratio /= CONTRAST_STEP
    ratio += 1e-9
    np.floor(ratio, out=ratio)
    np.clip(ratio, 0, N_CONTRAST - 1, out=ratio)
    return ratio.astype(np.intp)


def _cells(y: np.ndarray) -> np.ndarray:
    """The Y cell (intp (n,), 0..65535) of float32 luminances: the index
    :func:`compose.check.stats.lightness_bins_of_luminance` looks L* up with (same float32
    arithmetic)."""
    t = np.multiply(y, np.float32(_Y_LEVELS - 1))
    t += np.float32(0.5)
    cell = t.astype(np.intp)
    np.minimum(cell, _Y_LEVELS - 1, out=cell)
    return cell


@functools.lru_cache(maxsize=1)
def _cell_bounds() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(first, last) float32 luminance of every Y cell of :func:`_cells` (the smallest and the
    largest float32 in it; last < first for a cell no float32 falls in; the top cell ends at
    the luminance of 8-bit white, the largest :func:`_luminance8` gives), and L* (intp) per
    cell. The cell is a non-decreasing function of y (float32 multiply, add and truncation are
    monotone), so a cell's first value is the smallest float32 >= 0 whose cell is not below
    it: found from the cell's edge (cell - 0.5) / (levels - 1) rounded to float32, stepped one
    float32 at a time (a few steps) to where it holds and the float32 below does not (a
    bisection over the bit patterns gives the same: tests/test_measure.py)."""
    target = np.arange(_Y_LEVELS)
    at = np.maximum((target - 0.5) / (_Y_LEVELS - 1), 0.0).astype(np.float32)
    bits = at.view(np.uint32).astype(np.int64)

    def holds(b: np.ndarray) -> np.ndarray:
        return _cells(np.maximum(b, 0).astype(np.uint32).view(np.float32)) >= target

    for _ in range(64):
        step = np.where(~holds(bits), 1, np.where((bits > 0) & holds(bits - 1), -1, 0))
        if not step.any():
            break
        bits += step
    else:                                   # pragma: no cover - not a few steps away
        raise ArithmeticError("luminance cells: no edge found")
    first = bits.astype(np.uint32).view(np.float32)
    white = _luminance8(np.full((3, 1), 255, np.uint8))[0]
    last = np.empty_like(first)
    last[:-1] = np.nextafter(first[1:], np.float32(-1))
    last[-1] = white
    return first, last, _L_BIN.astype(np.intp)


@functools.lru_cache(maxsize=1)
def _top_cell_holds_white() -> bool:
    """True when no 8-bit colour's luminance (:func:`_luminance8`) falls past the last Y cell
    before :func:`_cells` caps it: every channel's table is non-decreasing and non-negative and
    float32 addition is monotone (IEEE 754), so no sum exceeds white's, and white's cell, found
    without the cap, is within the table. Then the cap changes nothing and can be skipped."""
    tables = CHANNEL_XYZ[1]
    if not (np.all(np.diff(tables, axis=1) >= 0) and np.all(tables >= 0)):
        return False
    white = _luminance8(np.full((3, 1), 255, np.uint8))
    t = np.multiply(white, np.float32(_Y_LEVELS - 1))
    t += np.float32(0.5)
    return int(t.astype(np.intp)[0]) <= _Y_LEVELS - 1


@functools.lru_cache(maxsize=64)
def _contrast_table(y_part: float) -> np.ndarray:
    """Contrast bin (intp (65536,)) of every Y cell against a colour of luminance ``y_part``,
    -1 where the cell holds luminances of more than one bin. The bin is monotone in y on each
    side of ``y_part`` (IEEE float64 addition and division are monotone), so a cell's bins lie
    between those of its first and last luminance, and of ``y_part`` when the cell holds it:
    equal ends (and no ``y_part`` inside) make the whole cell one bin."""
    first, last, _ = _cell_bounds()
    a, b = _contrast_bins(y_part, first), _contrast_bins(y_part, last)
    inside = (first.astype(np.float64) <= y_part) & (y_part <= last.astype(np.float64))
    table = np.where((a == b) & ~(inside & (a > 0)), a, -1)
    table[last < first] = 0                 # no luminance falls in these cells
    return table


@functools.lru_cache(maxsize=64)
def _contrast_table16(y_part: float) -> np.ndarray:
    """:func:`_contrast_table` as int16 (bins < N_CONTRAST = 2000; -1 kept), for the kernel."""
    return _contrast_table(y_part).astype(np.int16)


def _contrast_of_cells(y_part: float, cells: np.ndarray, y_below: np.ndarray) -> np.ndarray:
    """:func:`_contrast_bins` of ``y_below`` (float32 (n,)) whose Y cells are ``cells``: the
    cell's bin by table, computed only where a cell spans a bin edge (a few % of pixels)."""
    bins = np.take(_contrast_table(y_part), cells)
    edge = np.flatnonzero(bins < 0)
    if edge.size:
        bins[edge] = _contrast_bins(y_part, np.take(y_below, edge))
    return bins


def _overlay_compiled(part: PartStats, paint: Any, alpha: np.ndarray, beneath: np.ndarray,
                      ground8: np.ndarray | None, inner,
                      gathered: tuple[int, float, float] | None = None) -> tuple[bool, float | None]:
    """The beneath histograms of an overlay part (contrast, ground contrast, L*, colours) in one
    pass per composite by the compiled kernel (:mod:`compose.kernels`): the numbers of the
    numpy path below, bit for bit (every bin summed pixel by pixel in row-major order, as
    np.bincount adds; the by-colour path's sums are exact in any order). (False, None) when the
    kernel is missing or the arrays are not float32 (then the numpy path measures); else
    (True, the sum of the core's coverage when every sum of it is exact in any order
    (:func:`_sums_exact`) and some pixel is drawn, else None).
    ``gathered``: (pixels, least and largest weight) when the pixels beneath were gathered
    while the paint was composited (:meth:`WindowMeasure.paint_over`, into this thread's
    scratch arrays "held-w" and "held-c"): ``beneath`` is then composited already and not
    read; only their histograms are made here."""
    k = compiled()
    if k is None or alpha.dtype != np.float32 or alpha.ndim != 2 or beneath.dtype != np.float32 \
            or beneath.shape != (3,) + alpha.shape or (ground8 is not None and (
                ground8.dtype != np.float32 or ground8.shape != beneath.shape)):
        if gathered is not None:        # pragma: no cover - paint_over checked these
            raise RuntimeError("an overlay gathered while composited must be measured compiled")
        return False, None
    rs, cs = inner
    r0, r1, _ = rs.indices(alpha.shape[0])
    c0, c1, _ = cs.indices(alpha.shape[1])
    color = paint.color
    y_part = (_luminance_of(color) if isinstance(color, tuple)
              else float(relative_luminance(np.asarray(color))))
    contrast, lightness = np.zeros(N_CONTRAST), np.zeros(N_LIGHTNESS)
    dense = _local.__dict__.get("dense")
    if dense is None:                   # all zeros between calls
        dense = _local.dense = np.zeros(N_BENEATH)
    touched = _scratch("touched", (N_BENEATH,), np.intp)
    ctab = _contrast_table16(y_part)
    size = max(r1 - r0, 0) * max(c1 - c0, 0)
    held = _scratch("held-w", (size,), np.float32), _scratch("held-c", (size,), np.uint32)
    if gathered is not None:
        pixels, n, total = k.overlay_bins(*held, *gathered, y_part, CONTRAST_STEP, CHANNEL_XYZ[1],
                                          _L_BIN, ctab, contrast, lightness, BENEATH_BITS, dense,
                                          touched)
    else:
        pixels, n, total = k.overlay(alpha, beneath, r0, r1, c0, c1, y_part, CONTRAST_STEP,
                                     CHANNEL_XYZ[1], _L_BIN, ctab, contrast, lightness,
                                     BENEATH_BITS, dense, touched, *held)
    present = np.sort(touched[:n])
    weights = dense[present]
    dense[present] = 0.0
    if not pixels:
        return True, None
    part.contrast, part.beneath_lightness = contrast, lightness
    part.add_beneath(present, weights)
    if ground8 is None:                 # the layer's first part: beneath is the ground
        part.ground_contrast = contrast.copy()
    else:
        part.ground_contrast = np.zeros(N_CONTRAST)
        k.overlay(alpha, ground8, r0, r1, c0, c1, y_part, CONTRAST_STEP, CHANNEL_XYZ[1], _L_BIN,
                  ctab, part.ground_contrast, None, BENEATH_BITS, None, None, *held)
    return True, total


def _measure_part(stats: LayerStats, paint: Any, alpha: np.ndarray, beneath: np.ndarray | None,
                  ground8: np.ndarray | None, overlay: bool, inner, padded_opaque: bool = False,
                  counts: np.ndarray | None = None,
                  gathered: tuple[int, float, float] | None = None) -> tuple[bool, float | None]:
    """Add one paint of one window (core region) to the layer's statistics. Returns (True when
    the paint is a raster's and opaque over the whole core (alpha 1 everywhere); the sum of a
    flat paint's coverage over the core when it was found exact -- every sum of its values
    exact in any order (:func:`_sums_exact`), as an overlay's is measured -- or None).

    A flat paint's weight is its coverage summed over the core: exactly, in float64, when an
    overlay's measure finds its sums exact (8-bit coverage always is), else float32 as numpy
    sums the core.

    alpha: the paint's coverage x opacity over the padded window; beneath: the padded composite
    just before this paint; ground8: a copy of the padded composite under the whole layer (None
    for the layer's first paint, where it equals ``beneath``); both measured as 8-bit colours.
    padded_opaque: the caller found alpha 1 over the whole padded window (then over the core).
    counts: the palette entries' pixel counts over the core, counted by the caller
    (:func:`compose.composite.composite_palette`), or None; they are the weights where alpha is
    1 over the core (at the canvas's edges too, where the padded window is not drawn).
    gathered: what lay beneath, gathered while the paint was composited (see
    :func:`_overlay_compiled`), or None.
    """
    alpha_core = alpha[inner]
    opaque = False
    if paint.palette is not None:
        n = paint.palette.rgb8.shape[0]
        opaque = padded_opaque or bool(alpha_core.min() >= 1.0)
        if counts is not None and opaque:
            w = counts
        elif opaque:                    # an unweighted count is ~3x faster
            w = np.bincount(_intp_of(paint.index[inner]), minlength=n)
        else:
            w = np.bincount(_intp_of(paint.index[inner]), weights=_float64_of(alpha_core),
                            minlength=n)
        part = PartStats(paint.part, paint.palette.rgb8, w.astype(float))
        if paint.palette.nodata >= 0:
            stats.nodata_weight += float(w[paint.palette.nodata])
    else:
        rgb8 = np.clip(np.rint(np.asarray(paint.color) * 255), 0, 255).astype(np.uint8)[None, :]
        part = PartStats(paint.part, rgb8, np.zeros(1))     # its weight: after the measure
    total = None
    if overlay and paint.palette is None and beneath is not None:
        done, total = _overlay_compiled(part, paint, alpha, beneath, ground8, inner, gathered)
        if done:
            pass
        elif (pix := _core_pixels(alpha, inner)).size:
            # what lies beneath, as 8-bit colours; luminance and L* by lookup tables
            weights = _scratch("weights", (pix.size,), np.float64)       # exact: float32 values
            weights[:] = np.take(alpha.reshape(-1), pix, mode="clip",
                                 out=_scratch("weights-f", (pix.size,), alpha.dtype))
            below8 = _take8(beneath, pix)
            color = paint.color
            y_part = (_luminance_of(color) if isinstance(color, tuple)
                      else float(relative_luminance(np.asarray(color))))
            if alpha.dtype == np.float32 and _sums_exact(weights):
                total = float(weights.sum())    # exact: the kernel's sum, in any order
                _overlay_by_color(part, y_part, below8, weights)
            else:
                y_below = _luminance8(below8)
                cells = _cells(y_below)         # contrast and L* both by the Y cell's tables
                part.contrast = np.bincount(_contrast_of_cells(y_part, cells, y_below),
                                            weights=weights, minlength=N_CONTRAST)
                part.beneath_lightness = np.bincount(np.take(_cell_bounds()[2], cells),
                                                     weights=weights, minlength=N_LIGHTNESS)
                part.add_beneath(*_beneath_hist(_beneath_codes(below8), weights))
            if ground8 is not None:
                y_ground = _luminance8(_take8(ground8, pix, "take8-ground"))
                part.ground_contrast = np.bincount(
                    _contrast_of_cells(y_part, _cells(y_ground), y_ground),
                    weights=weights, minlength=N_CONTRAST)
            else:                       # the layer's first part: beneath is the ground
                assert part.contrast is not None
                part.ground_contrast = part.contrast.copy()
    if paint.palette is None:
        part.weights[0] = total if total is not None else float(alpha_core.sum())
    if paint.part in stats.parts:
        stats.parts[paint.part].merge(part)
    else:
        stats.parts[paint.part] = part
    return opaque, total


def _gray_compiled(k, s: LayerStats, view: np.ndarray, index: np.ndarray,
                   hidden: np.ndarray | None, alpha: np.ndarray | None,
                   above: np.ndarray | bool | None, counts: np.ndarray | None = None) -> bool:
    """A theme's grey-order rows of one window (L* per entry; blended colours and their counts
    when measured) by the compiled kernel, in one pass over the sampled pixels: the numbers of
    the numpy path in :meth:`WindowMeasure.finish`, bit for bit (counts are whole numbers; each
    entry's colour sums added pixel by pixel in row-major order, as np.bincount adds them).
    ``view``: the sampled composite (3, k1, k2) uint8; ``index``, ``hidden`` (what overlays
    cover; None: nothing), ``alpha`` (the theme's; None: 1) on the same samples (k1, k2);
    ``above``: what themes drawn later cover (flat, or True: everything, or None: nothing).
    ``counts``: the index's counts per entry over the window's core, or None: the rows added
    are then those from its first to its last entry counted (a few more than the samples
    have, whose rows stay zeros: the same sums) instead of the samples' own range, read.
    False (nothing added) when an array is of another type: then the numpy path measures."""
    if view.dtype != np.uint8 or index.dtype.kind not in "iu" or any(
            a is not None and a.dtype != np.float32 for a in (hidden, alpha)) or (
            isinstance(above, np.ndarray) and above.dtype != np.float32):
        return False
    if not index.size:
        return True
    present = np.flatnonzero(counts) if counts is not None else None
    if present is not None and present.size:
        lo, hi = int(present[0]), int(present[-1])
    else:
        lo, hi = k.index_range(index)
    m = hi - lo + 1
    counts = np.zeros((m, N_LIGHTNESS))
    colors = s.measures("value_color") and s.measures("value_count") and above is not True
    count, color = (np.zeros(m), np.zeros((m, 3))) if colors else (None, None)
    k.gray(view, index, alpha, hidden,
           above.reshape(index.shape) if isinstance(above, np.ndarray) else None,
           CHANNEL_XYZ[1], _L_BIN, _LINEAR8, lo, counts, count, color)
    s.add_rows("value_lightness", lo, counts)
    if count is not None and color is not None:
        s.add_rows("value_count", lo, count)
        s.add_rows("value_color", lo, color)
    return True


class WindowMeasure:
    """The statistics of one window, fed by the engine as it composites (see module docstring).

    ``template``: empty statistics of the render (:func:`new_statistics`); the window's own
    are a fresh copy of it. ``window``: the :class:`compose.canvas.Window` being rendered.
    """

    def __init__(self, template: Statistics, window) -> None:
        self.stats = template.empty_like()
        self.window = window
        self.inner = window.inner
        # themes drawn: (layer index, palette index (core), alpha (core), alpha 1 over the core,
        # the index's counts per entry over the core or None)
        self._themes: list[tuple[int, np.ndarray, np.ndarray, bool, np.ndarray | None]] = []
        self._hidden: np.ndarray | None = None   # core: how much overlays cover each pixel
        self._union: np.ndarray | None = None
        self._opaque = False                     # the union is one opaque raster paint
        self._union_sum: float | None = None     # the union is one paint of this exact sum
        self._ground: np.ndarray | None = None
        # reliefs drawn so far: [layer index, part, palette index (core), alpha (core), what
        # the layers drawn normally over it let through (core; None while nothing has been)]
        self._reliefs: list[list] = []

    def begin_layer(self, li: int, layer, n_paints: int, out: np.ndarray) -> None:
        """Layer ``li`` is about to composite ``n_paints`` paints over ``out`` (3, h, w)."""
        overlay = layer.spec.role == "overlay"
        # the ground under the whole layer, for the parts after the first
        self._ground = out.copy() if (overlay and n_paints > 1) else None
        self._union = None

    def paint_over(self, li: int, layer, pi: int, paint, alpha: np.ndarray, out: np.ndarray,
                   planes: np.ndarray, blend: str, opaque: bool = False) -> bool:
        """An overlay's flat-colour paint composited over ``out`` and measured in one pass
        (:func:`compose.composite.composite_flat_gathering`: what lies beneath is read from
        the rows as they are composited, not in a pass of its own), as :meth:`paint` then
        :func:`compose.composite.composite_over` would do. False when the compiled kernels
        cannot (then nothing is done: the caller measures, then composites)."""
        if layer.spec.role != "overlay" or paint.palette is not None \
                or alpha.dtype != np.float32 or alpha.ndim != 2 or out.dtype != np.float32 \
                or out.shape != (3,) + alpha.shape or compiled() is None:
            return False
        rs, cs = self.inner
        r0, r1, _ = rs.indices(alpha.shape[0])
        c0, c1, _ = cs.indices(alpha.shape[1])
        size = max(r1 - r0, 0) * max(c1 - c0, 0)
        held = _scratch("held-w", (size,), np.float32), _scratch("held-c", (size,), np.uint32)
        gathered = composite_flat_gathering(out, planes, alpha, blend, opaque, self.inner, *held)
        if gathered is None:
            return False
        self.paint(li, layer, pi, paint, alpha, out, opaque, gathered=gathered)
        return True

    def paint(self, li: int, layer, pi: int, paint, alpha: np.ndarray, out: np.ndarray,
              opaque: bool = False, counts: np.ndarray | None = None,
              gathered: tuple[int, float, float] | None = None) -> None:
        """Paint ``pi`` of layer ``li`` with coverage x opacity ``alpha`` is about to be
        composited over ``out`` (the padded composite so far; a raster's paint may be measured
        after, as it never reads ``out``); ``opaque``: the caller found ``alpha`` 1 everywhere;
        ``counts``: a raster's pixel counts per palette entry over the core (intp (n,)), counted
        by the caller (:func:`compose.composite.composite_palette`), or None; ``gathered``:
        an overlay's pixels beneath gathered as it was composited (:meth:`paint_over`; ``out``
        is then composited already and not read), or None."""
        spec = layer.spec
        overlay = spec.role == "overlay"
        a_core = alpha[self.inner]
        union = self._union
        first = union is None
        # the layer's first paint is its union so far (read only: never written to)
        self._union = a_core if union is None else np.maximum(union, a_core)
        opaque, total = _measure_part(self.stats.layers[li], paint, alpha,
                                      out if overlay else None, self._ground if pi else None,
                                      overlay, self.inner, opaque, counts, gathered)
        self._opaque = first and opaque
        self._union_sum = total if first else None
        if spec.role == "theme" and paint.palette is not None:
            self._themes.append((li, paint.index[self.inner], a_core, opaque, counts))
        if self._reliefs and spec.role != "overlay" and spec.blend == "normal":
            for r in self._reliefs:     # a relief under this paint shows through 1 - alpha
                if r[0] != li:
                    r[4] = 1.0 - a_core if r[4] is None else r[4] * (1.0 - a_core)
        if spec.kind == "relief" and paint.palette is not None:
            self._reliefs.append([li, paint.part, paint.index[self.inner], a_core, None])

    def end_layer(self, li: int, layer) -> None:
        """Layer ``li`` is composited."""
        if self._union is not None:
            if self._opaque:            # ones only: their float32 sum is their count, exactly
                self.stats.layers[li].covered += float(self._union.size)
            elif self._union_sum is not None:   # one paint, summed exactly by its measure
                self.stats.layers[li].covered += self._union_sum
            else:   # summed as a contiguous array (the sum's rounding depends on the layout)
                union = _scratch("union", self._union.shape, self._union.dtype)
                np.copyto(union, self._union)
                self.stats.layers[li].covered += float(union.sum())
            if layer.spec.role == "overlay":
                self._hidden = (self._union if self._hidden is None
                                else np.maximum(self._hidden, self._union))
        self._union = self._ground = None

    def finish(self, rgb8: np.ndarray, planes8: np.ndarray | None = None) -> Statistics:
        """The window's statistics, given its finished core ``rgb8`` (h, w, 3) uint8 (or the same
        pixels as planes, ``planes8`` (3, h, w) uint8, when the caller has them)."""
        for li, part, index, a_core, through in self._reliefs:
            if through is not None:     # the relief as seen on the composite
                p = self.stats.layers[li].parts[part]
                p.seen = np.bincount(index.ravel(), weights=(a_core * through).ravel(),
                                     minlength=p.weights.shape[0])
        themes = [t for t in self._themes if self.stats.layers[t[0]].measures("value_lightness")]
        if themes:
            # Grey order is a rank correlation: every second row and column (a quarter of the
            # pixels; every fourth on large canvases, compose.check.stats.gray_stride), on the
            # canvas's own grid so windows agree, estimates it as well.
            step = gray_stride(self.stats.width, self.stats.height)
            r_off, c_off = (-self.window.row) % step, (-self.window.col) % step
            sub = (slice(r_off, None, step), slice(c_off, None, step))
            # planar (3, k): each channel contiguous
            view = (planes8[(slice(None),) + sub] if planes8 is not None
                    else np.moveaxis(rgb8[sub], -1, 0))
            n_s = view.shape[1] * view.shape[2]
            numpy_samples: list = []     # (sampled, lightness) of the numpy path, made once

            def samples() -> tuple[np.ndarray, np.ndarray]:
                """The sampled channels as indices (intp (3, k): every lookup below takes them
                without converting them again) and their L* (intp (k,))."""
                if numpy_samples:
                    return numpy_samples[0]
                codes8 = _scratch("sampled", view.shape, np.intp)
                np.copyto(codes8, view)
                sampled = codes8.reshape(3, -1)
                y = _scratch("sampled-y", (n_s,), np.float32)
                t = _scratch("sampled-t", (n_s,), np.float32)
                np.take(CHANNEL_XYZ[1, 0], sampled[0], out=y, mode="wrap")     # as _luminance8
                y += np.take(CHANNEL_XYZ[1, 1], sampled[1], out=t, mode="wrap")
                y += np.take(CHANNEL_XYZ[1, 2], sampled[2], out=t, mode="wrap")
                # L* (intp) by the Y cell, as lightness_bins_of_luminance
                cells = _scratch("sampled-cell", (n_s,), np.intp)
                np.multiply(y, np.float32(_Y_LEVELS - 1), out=t)
                t += np.float32(0.5)
                cells[:] = t
                if not _top_cell_holds_white():
                    np.minimum(cells, _Y_LEVELS - 1, out=cells)
                lightness = np.take(_cell_bounds()[2], cells, mode="clip",
                                    out=_scratch("sampled-lightness", (n_s,), np.intp))
                numpy_samples.append((sampled, lightness))
                return sampled, lightness

            hidden = None if self._hidden is None else self._hidden[sub]
            shown = None        # where hidden < 0.02 (flat), for the numpy path
            # each theme's alpha on the sample grid (None: 1 everywhere)
            sampled_alpha = [None if opaque else a_core[sub].ravel()
                             for _, _, a_core, opaque, _ in themes]
            # a theme drawn later (more than half there) hides an earlier one: the earlier
            # theme's blended colours are counted only where it is not covered that way
            covered_above: list[np.ndarray | bool | None] = [None] * len(themes)
            running: np.ndarray | bool | None = None
            for k in range(len(themes) - 1, -1, -1):
                covered_above[k] = running
                a = sampled_alpha[k]
                if a is None or running is True:        # an opaque theme covers everything
                    running = True
                else:
                    running = a if running is None else np.maximum(running, a)
            linear = None
            kernel = compiled()
            for (li, index, a_core, _, counts), a_s, above in zip(themes, sampled_alpha,
                                                                  covered_above):
                s = self.stats.layers[li]
                if kernel is not None and _gray_compiled(
                        kernel, s, view, index[sub], hidden, None if a_s is None else a_core[sub],
                        above, counts):
                    continue
                sampled, lightness = samples()
                if hidden is not None and shown is None:
                    shown = np.less(hidden, 0.02, out=_scratch("shown", hidden.shape, np.bool_)).ravel()
                # pixels left out are counted in one bin past the table's end, dropped after
                # (every other bin gets the same pixels in the same order as by selecting them)
                keep = None if a_s is None else a_s > 0.5
                if shown is not None:   # grey order is judged where the theme shows, not under lines
                    keep = shown if keep is None else (keep & shown)
                index_s = index[sub]
                if not index_s.size:
                    continue
                # counted over the entries this window has (lo..hi): the same numbers in the
                # same order per entry, without the table's other rows of zeros
                lo, hi = int(index_s.min()), int(index_s.max())
                m = hi - lo + 1
                # each pixel's entry - lo, m where left out: its (entry, L*) cell then lies
                # past the m x N_LIGHTNESS cells counted
                entry = _scratch("sampled-index", (n_s,), np.intp)
                np.subtract(index_s, lo, out=entry.reshape(index_s.shape), dtype=np.intp)
                if keep is not None:
                    np.putmask(entry, ~keep, m)
                cell = _scratch("sampled-entry", (n_s,), np.intp)
                np.multiply(entry, N_LIGHTNESS, out=cell)
                cell += lightness
                counts = np.bincount(cell, minlength=(m + 1) * N_LIGHTNESS)[
                    :m * N_LIGHTNESS].reshape(m, N_LIGHTNESS)
                # whole numbers as float64 (exact), added to the entries' rows only
                s.add_rows("value_lightness", lo, counts.astype(np.float64))
                if s.measures("value_color") and s.measures("value_count"):   # blended colours
                    if above is True:       # hidden by an opaque theme drawn later everywhere
                        continue
                    if a_s is None and above is None:
                        # drawn where shown, as kept above: the same pixels, counted there
                        s.add_rows("value_count", lo, counts.sum(axis=1).astype(np.float64))
                        idx = entry                 # the entry - lo (m where left out)
                    else:
                        drawn = None if a_s is None else a_s > 0   # wherever drawn, however faint
                        if shown is not None:
                            drawn = shown if drawn is None else (drawn & shown)
                        if isinstance(above, np.ndarray):
                            low = above <= 0.5
                            drawn = low if drawn is None else (drawn & low)
                        idx = index_s.ravel().astype(np.intp)
                        idx -= lo
                        if drawn is not None:
                            np.putmask(idx, ~drawn, m)
                        s.add_rows("value_count", lo,
                                   np.bincount(idx, minlength=m + 1)[:m].astype(np.float64))
                    if linear is None:
                        linear = _scratch("sampled-linear", (3, n_s), np.float64)
                        for c in range(3):
                            np.take(_LINEAR8, sampled[c], out=linear[c], mode="wrap")
                    block = np.empty((m, 3))
                    for c in range(3):   # linear-light channel values of the composite
                        block[:, c] = np.bincount(idx, weights=linear[c], minlength=m + 1)[:m]
                    s.add_rows("value_color", lo, block)
        return self.stats
