"""Blend modes and source-over compositing on planar colour (3, H, W).

Formulas from W3C "Compositing and Blending Level 1" (https://www.w3.org/TR/compositing-1/),
sections "Blending" (the general formula), "Separable blend modes" (normal, multiply, screen,
overlay, hard-light, soft-light) and "Simple alpha compositing" / "source-over".

Colours are straight (non-premultiplied), gamma-encoded sRGB in [0, 1], float32, band-separate
(3, H, W). Blending works on the encoded values, as the spec's formulas and browsers do. The
backdrop is always opaque (the map background lies under the first layer), so the spec's general
formula ``Cs' = (1 - ab) Cs + ab B(Cb, Cs)`` has ab = 1 and source-over reduces to
``Co = (1 - as) Cb + as B(Cb, Cs)`` with ``as`` = coverage x opacity.
"""
from __future__ import annotations

from collections.abc import Callable, Iterable

import numpy as np

from compose.errors import StyleError
from compose.kernels import get as compiled

__all__ = ["BLEND_MODES", "STRIP_PIXELS", "blend_mode", "composite_over", "composite_palette",
           "composite_layers",
           "normal", "multiply", "screen", "overlay", "hard_light", "soft_light"]

#: Pixels per work unit in :func:`composite_over`: one channel of a strip of whole rows, sized
#: so the blend's temporaries stay in L2 (measured on the project machine; no source).
STRIP_PIXELS = 1 << 15

BlendFunc = Callable[[np.ndarray, np.ndarray], np.ndarray]


# --- W3C Compositing 1, "Separable blend modes": B(Cb, Cs), elementwise -----------------------

def normal(cb: np.ndarray, cs: np.ndarray) -> np.ndarray:
    """"normal": B(Cb, Cs) = Cs."""
    return np.broadcast_to(cs, np.broadcast_shapes(np.shape(cb), np.shape(cs)))


def multiply(cb: np.ndarray, cs: np.ndarray) -> np.ndarray:
    """"multiply": B(Cb, Cs) = Cb x Cs."""
    return np.multiply(cb, cs)


def screen(cb: np.ndarray, cs: np.ndarray) -> np.ndarray:
    """"screen": B(Cb, Cs) = Cb + Cs - Cb x Cs."""
    out = np.add(cb, cs)
    out -= np.multiply(cb, cs)
    return out


def _above(x: np.ndarray, edge: float) -> np.ndarray:
    """1.0 where x > edge else 0.0, in x's dtype (arithmetic selects beat np.where's branches)."""
    x = np.asarray(x)
    return np.greater(x, edge).astype(x.dtype if x.dtype.kind == "f" else np.float64)


def hard_light(cb: np.ndarray, cs: np.ndarray) -> np.ndarray:
    """"hard-light": Multiply(Cb, 2 Cs) if Cs <= 0.5, else Screen(Cb, 2 Cs - 1)."""
    cb, cs = np.broadcast_arrays(cb, cs)
    t = np.multiply(cs, 2)
    low = np.multiply(cb, t)
    # Screen(Cb, t - 1) = Cb + (t - 1) - Cb (t - 1) = (t - 1) + Cb (2 - t)
    high = np.subtract(2, t)
    high *= cb
    high += t
    high -= 1
    high -= low
    high *= _above(cs, 0.5)
    high += low
    return high


def overlay(cb: np.ndarray, cs: np.ndarray) -> np.ndarray:
    """"overlay": B(Cb, Cs) = HardLight(Cs, Cb), hard-light with the arguments swapped."""
    return hard_light(cs, cb)


def _soft_light_d(cb: np.ndarray) -> np.ndarray:
    """D(Cb) of "soft-light": ((16 Cb - 12) Cb + 4) Cb if Cb <= 0.25, else sqrt(Cb)."""
    poly = np.multiply(cb, 16)
    poly -= 12
    poly *= cb
    poly += 4
    poly *= cb
    root = np.sqrt(cb)
    root -= poly
    root *= _above(cb, 0.25)
    root += poly
    return root


def soft_light(cb: np.ndarray, cs: np.ndarray) -> np.ndarray:
    """"soft-light": if Cs <= 0.5, Cb - (1 - 2 Cs) Cb (1 - Cb); else Cb + (2 Cs - 1)(D(Cb) - Cb).

    Both branches are ``Cb + (2 Cs - 1) X`` with X = Cb (1 - Cb) or D(Cb) - Cb.
    """
    cb, cs = np.broadcast_arrays(cb, cs)
    x_low = np.subtract(1, cb)
    x_low *= cb
    x_high = _soft_light_d(cb)
    x_high -= cb
    x_high -= x_low
    x_high *= _above(cs, 0.5)
    x_high += x_low
    k = np.multiply(cs, 2)
    k -= 1
    x_high *= k
    x_high += cb
    return x_high


#: name -> B(Cb, Cs); the names are the W3C blend mode keywords the style uses.
BLEND_MODES: dict[str, BlendFunc] = {
    "normal": normal,
    "multiply": multiply,
    "screen": screen,
    "overlay": overlay,
    "soft-light": soft_light,
}


def blend_mode(name: str, where: str = "") -> BlendFunc:
    """Look a blend mode up by name; StyleError naming ``where`` and the choices otherwise."""
    try:
        return BLEND_MODES[name]
    except (KeyError, TypeError):
        msg = f"{name!r} is not a blend mode; one of: {', '.join(BLEND_MODES)}"
        raise StyleError(f"{where}: {msg}" if where else msg) from None


def _rows(a: np.ndarray, r0: int, r1: int) -> np.ndarray:
    """Rows r0..r1 of the last-but-one axis, or the array itself where that axis broadcasts."""
    return a if a.shape[-2] == 1 else a[..., r0:r1, :]


def composite_over(backdrop: np.ndarray, source: np.ndarray, alpha: np.ndarray,
                   mode: str = "normal", out: np.ndarray | None = None, *,
                   opaque: bool = False) -> np.ndarray:
    """Blend ``source`` onto an opaque ``backdrop`` and composite source-over.

    backdrop: (3, H, W) straight sRGB in [0, 1], opaque.
    source: (3, H, W) straight sRGB in [0, 1], or (3, 1, 1) for one colour everywhere.
    alpha: (H, W) source alpha in [0, 1] (coverage x opacity), or (1, 1) / scalar.
    mode: a name in :data:`BLEND_MODES`.
    out: (3, H, W) float32 to write into (may be ``backdrop`` itself, for in-place work).
    opaque: the caller knows ``alpha`` is 1 everywhere (its multiplication is then skipped: the
    same numbers, x * 1 = x exactly).

    Returns ``(1 - alpha) Cb + alpha B(Cb, Cs)`` as float32 (3, H, W) (W3C Compositing 1,
    "Blending" general formula with an opaque backdrop, then "source-over"). Works in strips of
    rows so the temporaries stay in cache; one flat colour composited in place with "normal" or
    "multiply" and alpha (H, W) runs in the compiled kernel when there is one
    (:mod:`compose.kernels`), the same float32 operations in the same order.
    """
    func = blend_mode(mode, "composite")
    backdrop = np.asarray(backdrop, dtype=np.float32)
    if backdrop.ndim != 3 or backdrop.shape[0] != 3:
        raise ValueError(f"backdrop must be (3, H, W), got {backdrop.shape}")
    _, h, w = backdrop.shape
    source = np.asarray(source, dtype=np.float32)
    if source.ndim == 1:
        source = source.reshape(3, 1, 1)
    alpha = np.asarray(alpha, dtype=np.float32)
    alpha = alpha.reshape(1, 1) if alpha.ndim == 0 else alpha
    np.broadcast_shapes(backdrop.shape, source.shape, (1,) + alpha.shape)  # raises when wrong
    if out is None:
        out = np.empty((3, h, w), np.float32)
    elif out.shape != (3, h, w):
        raise ValueError(f"out must be (3, {h}, {w}), got {out.shape}")
    kernel = compiled()
    if (kernel is not None and out is backdrop and func in (normal, multiply)
            and source.shape[0] == 3 and all(n == 1 or st == 0 for n, st in
                                             zip(source.shape[1:], source.strides[1:]))
            and alpha.shape == (h, w)):
        # one flat colour (a broadcast view): in one pass per row, the same float32 operations
        kernel.flat(backdrop, np.ascontiguousarray(source[:, 0, 0]), alpha,
                    0 if func is normal else 1, bool(opaque))
        return out
    rows = max(1, STRIP_PIXELS // max(w, 1))
    mix_buf = np.empty((min(rows, h), w), np.float32)
    for r0 in range(0, h, rows):
        r1 = min(r0 + rows, h)
        a = _rows(alpha, r0, r1)
        for c in range(3):
            cs = _rows(source[c if source.shape[0] == 3 else 0], r0, r1)
            _blend_into(func, backdrop[c, r0:r1], cs, a, out[c, r0:r1], mix_buf[:r1 - r0], opaque)
    return out


def composite_flat_gathering(backdrop: np.ndarray, source: np.ndarray, alpha: np.ndarray,
                             mode: str, opaque: bool, region: tuple[slice, slice],
                             weights: np.ndarray, colors: np.ndarray) -> tuple[int, float, float] | None:
    """:func:`composite_over` of one flat colour in place on ``backdrop`` by the compiled kernel,
    which also hands the overlay's measure (:mod:`compose.measure`) what lay beneath, read in
    the same pass: each row of ``region`` (rows, columns of the window), before it is
    composited, gives its pixels drawn (alpha > 0), in row-major order, their alpha to
    ``weights`` (float32) and the backdrop's 8-bit colours (r << 16 | g << 8 | b, each channel
    x 255 clipped and rounded half to even) to ``colors`` (uint32), each with room for the
    region's pixels. Returns (pixels, least and largest weight; inf and 0 when none is drawn),
    or None when the kernel cannot (no build; another blend mode; not one flat colour, float32
    planes and alpha with contiguous rows): then nothing is done."""
    kernel = compiled()
    func = BLEND_MODES.get(mode)
    if (kernel is None or func not in (normal, multiply) or backdrop.dtype != np.float32
            or backdrop.ndim != 3 or backdrop.shape[0] != 3 or alpha.dtype != np.float32
            or alpha.shape != backdrop.shape[1:]):
        return None
    source = np.asarray(source, dtype=np.float32)
    if source.ndim == 1:
        source = source.reshape(3, 1, 1)
    if source.ndim != 3 or source.shape[0] != 3 or not all(
            n == 1 or st == 0 for n, st in zip(source.shape[1:], source.strides[1:])):
        return None
    _, h, w = backdrop.shape
    r0, r1, _ = region[0].indices(h)
    c0, c1, _ = region[1].indices(w)
    got = kernel.flat_gather(backdrop, np.ascontiguousarray(source[:, 0, 0]), alpha,
                             0 if func is normal else 1, bool(opaque), r0, max(r0, r1), c0,
                             max(c0, c1), weights, colors)
    return None if got is None else (int(got[0]), float(got[1]), float(got[2]))


def _blend_into(func: BlendFunc, cb: np.ndarray, cs: np.ndarray, a: np.ndarray, dst: np.ndarray,
                mix: np.ndarray, opaque: bool) -> None:
    """One channel of one strip: ``dst = cb + a (B(cb, cs) - cb)`` (``mix``: scratch of the
    strip's shape; ``dst`` may be ``cb``)."""
    if func is normal:
        np.subtract(cs, cb, out=mix)
    elif func is multiply:
        np.multiply(cb, cs, out=mix)
        mix -= cb
    else:
        mix = func(cb, cs)
        mix -= cb
    if not opaque:
        mix *= a
    np.add(cb, mix, out=dst)


def composite_palette(backdrop: np.ndarray, table: np.ndarray, index: np.ndarray,
                      alpha: np.ndarray, mode: str = "normal", *, opaque: bool = False,
                      counts: np.ndarray | None = None,
                      region: tuple[slice, slice] | None = None) -> np.ndarray:
    """:func:`composite_over` of a lookup table's colours, in place on ``backdrop``: the source
    is ``table[:, index]``, looked up one strip at a time (no (3, H, W) source is made); the same
    numbers as ``composite_over(backdrop, table[:, index], alpha, mode, out=backdrop)``.

    backdrop: (3, H, W) float32, opaque; table: (3, n) float32 colour planes in [0, 1]
    (:attr:`compose.layers.base.Palette.planes`); index: (H, W) integer indices, each below n;
    alpha, mode, opaque: as for :func:`composite_over`.
    counts: an integer array (n,) to which the histogram of ``index`` over ``region`` (a pair of
    slices with steps of 1 into (H, W), e.g. a window's core; default all) is added: the numbers
    of ``np.bincount(index[region].ravel(), minlength=n)``, counted strip by strip from the
    indices the lookup converts anyway (counts are whole numbers: any grouping adds up alike).
    For "normal" and "multiply" with alpha (H, W) or (1, 1) the compiled kernel
    (:mod:`compose.kernels`) looks up, blends and counts in one pass per row: the same float32
    operations in the same order, the same bits (tests/test_kernels.py).
    """
    func = blend_mode(mode, "composite")
    if backdrop.dtype != np.float32 or backdrop.ndim != 3 or backdrop.shape[0] != 3:
        raise ValueError(f"backdrop must be float32 (3, H, W), got {backdrop.dtype} {backdrop.shape}")
    _, h, w = backdrop.shape
    if index.shape != (h, w):
        raise ValueError(f"index must be ({h}, {w}), got {index.shape}")
    alpha = np.asarray(alpha, dtype=np.float32)
    alpha = alpha.reshape(1, 1) if alpha.ndim == 0 else alpha
    np.broadcast_shapes((h, w), alpha.shape)                              # raises when wrong
    row_slice, col_slice = region if region is not None else (slice(0, h), slice(0, w))
    rs0, rs1, _ = row_slice.indices(h)
    cs0, cs1, _ = col_slice.indices(w)
    kernel = compiled()
    if (kernel is not None and func in (normal, multiply) and alpha.ndim == 2
            and alpha.shape in ((h, w), (1, 1)) and table.dtype == np.float32
            and table.ndim == 2 and table.shape[0] == 3 and table.flags.c_contiguous
            and index.dtype.kind in "iu" and (counts is None or counts.dtype == np.intp)):
        # one pass per row: gather, blend and count (the same float32 operations)
        if counts is not None and not (rs1 > rs0 and cs1 > cs0):
            counts = None
        kernel.palette(backdrop, table, index, alpha, 0 if func is normal else 1, bool(opaque),
                       counts, rs0, max(rs1, rs0), cs0, max(cs1, cs0))
        return backdrop
    rows = max(1, STRIP_PIXELS // max(w, 1))
    n = min(rows, h)
    mix_buf = np.empty((n, w), np.float32)
    src_buf = np.empty((n, w), np.float32)
    # the strip's indices as intp, converted once: np.take converts any other integer type on
    # every call, and np.bincount too
    idx_buf = np.empty((n, w), np.intp)
    size = table.shape[1]
    for r0 in range(0, h, rows):
        r1 = min(r0 + rows, h)
        a = _rows(alpha, r0, r1)
        idx = idx_buf[:r1 - r0]
        np.copyto(idx, index[r0:r1], casting="unsafe")
        for c in range(3):
            # "wrap" equals "clip" for indices in range; unbuffered
            cs = np.take(table[c], idx, out=src_buf[:r1 - r0], mode="wrap")
            cb = backdrop[c, r0:r1]
            _blend_into(func, cb, cs, a, cb, mix_buf[:r1 - r0], opaque)
        if counts is not None and min(r1, rs1) > max(r0, rs0) and cs1 > cs0:
            part = idx[max(r0, rs0) - r0:min(r1, rs1) - r0]
            counts += np.bincount(part.reshape(-1), minlength=size)   # whole rows, contiguous
            for edge in (part[:, :cs0], part[:, cs1:]):               # less what lies aside
                if edge.size:
                    counts -= np.bincount(edge.reshape(-1), minlength=size)
    return backdrop


def composite_layers(background_rgb, paints: Iterable[tuple[np.ndarray, np.ndarray, str]],
                     shape: tuple[int, int] | None = None) -> np.ndarray:
    """Fold ``(rgb, alpha, mode)`` paints, lowest first, over a background.

    background_rgb: (3,) one colour (then ``shape`` = (H, W) or the first paint's alpha gives the
    size) or (3, H, W). Each paint is as in :func:`composite_over`. Returns float32 (3, H, W).
    """
    paints = list(paints)
    bg = np.asarray(background_rgb, dtype=np.float32)
    if bg.ndim == 1:
        if shape is None:
            if not paints or np.ndim(paints[0][1]) != 2:
                raise ValueError("composite_layers needs shape= with a (3,) background")
            shape = np.shape(paints[0][1])
        canvas = np.empty((3, *shape), np.float32)
        canvas[:] = bg.reshape(3, 1, 1)
    else:
        canvas = bg.copy()
    for rgb, alpha, mode in paints:
        composite_over(canvas, rgb, alpha, mode, out=canvas)
    return canvas
