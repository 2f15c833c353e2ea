"""sRGB gamut test and gamut mapping by chroma reduction at constant L* and hue.

Nothing here clips channels silently: :func:`map_to_gamut` lowers CIE C*ab only, by a vectorised
coarse scan plus bisection, and returns how much chroma it removed so callers can report it.
"""
from __future__ import annotations

import numpy as np

from compose.color.lab import lch_to_srgb

__all__ = ["GAMUT_TOLERANCE", "in_gamut", "lch_in_gamut", "max_chroma", "map_to_gamut"]

# How far outside [0, 1] an encoded channel may lie and still count as inside: a tenth of one
# 8-bit code. Rounding to 8 bits absorbs it.
GAMUT_TOLERANCE = 0.1 / 255


def in_gamut(rgb, tol: float = GAMUT_TOLERANCE) -> np.ndarray:
    """True where gamma-encoded sRGB (..., 3) lies inside [0, 1] on every channel (within ``tol``)."""
    rgb = np.asarray(rgb, dtype=float)
    return np.all((rgb >= -tol) & (rgb <= 1 + tol), axis=-1)


def lch_in_gamut(lch, tol: float = GAMUT_TOLERANCE) -> np.ndarray:
    """True where CIE LCh(ab) (..., 3) is displayable in sRGB."""
    return in_gamut(lch_to_srgb(lch), tol)


# Coarse chroma samples before bisection (C*ab), and colours handled per batch (bounds memory).
_SCAN_STEP = 0.5
# The search holds colours to a tolerance a hair inside GAMUT_TOLERANCE, so a result found on the
# edge stays inside when it is converted again with other rounding (1e-9 of a channel is about
# 1e-6 C*ab, far below anything measured).
_SEARCH_TOL = GAMUT_TOLERANCE - 1e-9
_BATCH = 2048
# Scan samples tested at once per colour, from the top down (most colours stop in the first).
_SCAN_CHUNK = 16


def _largest_inside(L: np.ndarray, h: np.ndarray, top: np.ndarray, iterations: int) -> np.ndarray:
    """Largest C in [0, top] displayable at lightness L and hue h (1-D arrays of one length).

    Along a line of constant L* and h the displayable chromas are not always one interval: near the
    yellow corner of the cube (L* 95-97, h 100-105) e.g. L* 96, h 102 is inside up to C 40.6 and
    again from 89.1 to 95.7. A bisection over [0, top] alone can stop at the first edge, so a scan in
    steps of at most ``_SCAN_STEP`` finds the last inside sample and bisection refines the edge just
    above it. C = 0 counts as inside (a grey). Islands narrower than the step (only within about
    one unit of the yellow corner itself) can still be missed.
    """
    out = np.empty(L.shape)
    if L.size == 0:
        return out
    n = max(1, int(np.ceil(np.nanmax(np.where(np.isfinite(top), top, 0.0)) / _SCAN_STEP)))
    frac = np.linspace(0.0, 1.0, n + 1)
    for s in range(0, L.size, _BATCH):
        l, hh, c = L[s:s + _BATCH], h[s:s + _BATCH], top[s:s + _BATCH]
        grid = c[:, None] * frac[None, :]
        # the scan runs from the top down and stops for a colour at its last inside sample (the
        # same sample a scan of every step finds); colours displayable at their top keep it
        k = np.full(c.size, n)
        todo = np.flatnonzero(~lch_in_gamut(np.stack([l, grid[:, n], hh], axis=-1), _SEARCH_TOL))
        rest, end = todo, n
        while rest.size and end > 0:
            begin = max(0, end - _SCAN_CHUNK)
            ok = lch_in_gamut(np.stack(np.broadcast_arrays(
                l[rest, None], grid[rest, begin:end], hh[rest, None]), axis=-1), _SEARCH_TOL)
            if begin == 0:
                ok[:, 0] = True
            found = ok.any(axis=1)
            k[rest[found]] = end - 1 - np.argmax(ok[found, ::-1], axis=1)
            rest, end = rest[~found], begin
        out[s:s + _BATCH] = c
        if todo.size:
            lt, ht, kt = l[todo], hh[todo], k[todo]
            lo = grid[todo, kt]
            hi = grid[todo, np.minimum(kt + 1, n)]
            for _ in range(iterations):
                mid = (lo + hi) / 2
                inside = lch_in_gamut(np.stack([lt, mid, ht], axis=-1), _SEARCH_TOL)
                lo = np.where(inside, mid, lo)
                hi = np.where(inside, hi, mid)
            out[s + todo] = lo
    return out


def max_chroma(L, h, iterations: int = 40, top=200.0) -> np.ndarray:
    """Largest C*ab displayable in sRGB at lightness ``L`` (0-100) and hue ``h`` (degrees), not
    above ``top`` (broadcast; a smaller ``top`` is faster: the scan covers [0, top] only)."""
    L, h, top = np.broadcast_arrays(np.asarray(L, dtype=float), np.asarray(h, dtype=float),
                                    np.asarray(top, dtype=float))
    flat = _largest_inside(L.ravel(), h.ravel(), top.ravel().copy(), iterations)
    return flat.reshape(L.shape)


def map_to_gamut(lch, iterations: int = 40) -> tuple[np.ndarray, np.ndarray]:
    """Map CIE LCh(ab) (..., 3) into sRGB by lowering chroma only.

    L* must lie in [0, 100] (values outside are clipped to it, the only change to L*); hue is kept
    exactly. The new chroma is the largest displayable one not above the old (see
    :func:`_largest_inside`). Returns ``(mapped_lch, removed)`` where ``removed`` (...) is the
    chroma taken off (0 where the colour was already inside).
    """
    lch = np.array(lch, dtype=float, copy=True)
    lch[..., 0] = np.clip(lch[..., 0], 0.0, 100.0)
    inside = lch_in_gamut(lch)
    if np.all(inside):
        return lch, np.zeros(lch.shape[:-1])
    C = lch[..., 1].copy()
    outside = ~inside
    todo = lch[outside]
    lch[outside, 1] = _largest_inside(todo[:, 0], todo[:, 2], todo[:, 1], iterations)
    return lch, C - lch[..., 1]
