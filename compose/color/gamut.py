"""sRGB gamut test and gamut mapping by chroma reduction at constant L* and hue.

Nothing here clips channels silently: :func:`map_to_gamut` lowers CIE C*ab only, by a vectorised
bisection, and returns how much chroma it removed so callers can report it.
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


def max_chroma(L, h, iterations: int = 40) -> np.ndarray:
    """Largest C*ab displayable in sRGB at lightness ``L`` (0-100) and hue ``h`` (degrees), broadcast."""
    L, h = np.broadcast_arrays(np.asarray(L, dtype=float), np.asarray(h, dtype=float))
    lo = np.zeros(L.shape)
    hi = np.full(L.shape, 200.0)
    for _ in range(iterations):
        mid = (lo + hi) / 2
        ok = lch_in_gamut(np.stack([L, mid, h], axis=-1))
        lo = np.where(ok, mid, lo)
        hi = np.where(ok, hi, mid)
    return lo


def map_to_gamut(lch, iterations: int = 40) -> tuple[np.ndarray, np.ndarray]:
    """Map CIE LCh(ab) (..., 3) into sRGB by lowering chroma only.

    L* must lie in [0, 100] (values outside are clipped to it, the only change to L*); hue is kept
    exactly. Returns ``(mapped_lch, removed)`` where ``removed`` (...) is the chroma taken off
    (0 where the colour was already inside).
    """
    lch = np.array(lch, dtype=float, copy=True)
    lch[..., 0] = np.clip(lch[..., 0], 0.0, 100.0)
    inside = lch_in_gamut(lch)
    if np.all(inside):
        return lch, np.zeros(lch.shape[:-1])
    L, C, h = lch[..., 0], lch[..., 1], lch[..., 2]
    lo = np.zeros(C.shape)
    hi = C.copy()
    for _ in range(iterations):
        mid = (lo + hi) / 2
        ok = lch_in_gamut(np.stack([L, mid, h], axis=-1))
        lo = np.where(ok, mid, lo)
        hi = np.where(ok, hi, mid)
    new_c = np.where(inside, C, lo)
    out = np.stack([L, new_c, h], axis=-1)
    return out, C - new_c
