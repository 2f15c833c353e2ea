"""Fast paths for whole images of 8-bit sRGB, without a colour library per pixel.

* :func:`srgb8_to_lch` -- per-channel lookup tables of linear light already multiplied by the
  RGB -> XYZ matrix columns (9 tables of 256 float32), then array maths for CIELAB and LCh,
  in row chunks that stay in cache.
* :func:`pack_rgb8` / :func:`color_counts` -- pack pixels to one uint32 and count distinct colours,
  so statistics convert only the distinct colours (an 8192 x 8192 map holds far fewer than 67 M).

Same convention as :mod:`compose.color.srgb` and :mod:`compose.color.lab`.
"""
from __future__ import annotations

import numpy as np

from compose.color.lab import WHITE_D65, lab_to_lch, srgb_to_lab
from compose.color.srgb import M_RGB_TO_XYZ, srgb_to_linear

__all__ = ["srgb8_to_lch", "pack_rgb8", "unpack_rgb8", "color_counts", "lab_of_packed", "CHANNEL_XYZ"]

_LIN = srgb_to_linear(np.arange(256) / 255.0)
# CHANNEL_XYZ[i, c] : contribution of channel c (R, G, B) to X/Y/Z component i, divided by the white.
CHANNEL_XYZ = (M_RGB_TO_XYZ[:, :, None] * _LIN[None, None, :] / WHITE_D65[:, None, None]).astype(np.float32)
_EPS = np.float32((6 / 29) ** 3)
_K = np.float32(1 / (3 * (6 / 29) ** 2))
_C0 = np.float32(4 / 29)


def _f32(t: np.ndarray) -> np.ndarray:
    out = np.cbrt(t)
    small = t <= _EPS
    if small.any():
        out[small] = t[small] * _K + _C0
    return out


def srgb8_to_lch(rgb8: np.ndarray, chunk: int = 1 << 16) -> np.ndarray:
    """8-bit sRGB (..., 3) uint8 -> CIE LCh(ab) (..., 3) float32 (L* 0-100, C*ab, h in degrees).

    Agrees with :func:`compose.color.lab.srgb_to_lch` to about 1e-3 (float32 arithmetic).
    """
    rgb8 = np.asarray(rgb8)
    if rgb8.dtype != np.uint8 or rgb8.shape[-1] != 3:
        raise ValueError("srgb8_to_lch needs a uint8 array of shape (..., 3)")
    flat = rgb8.reshape(-1, 3)
    out = np.empty((flat.shape[0], 3), dtype=np.float32)
    t = CHANNEL_XYZ
    for s in range(0, flat.shape[0], chunk):
        px = flat[s:s + chunk]
        r, g, b = px[:, 0], px[:, 1], px[:, 2]
        fx = _f32(np.take(t[0, 0], r) + np.take(t[0, 1], g) + np.take(t[0, 2], b))
        fy = _f32(np.take(t[1, 0], r) + np.take(t[1, 1], g) + np.take(t[1, 2], b))
        fz = _f32(np.take(t[2, 0], r) + np.take(t[2, 1], g) + np.take(t[2, 2], b))
        a = np.float32(500) * (fx - fy)
        bb = np.float32(200) * (fy - fz)
        o = out[s:s + chunk]
        o[:, 0] = np.float32(116) * fy - np.float32(16)
        o[:, 1] = np.sqrt(a * a + bb * bb)
        h = np.arctan2(bb, a)
        h *= np.float32(180 / np.pi)
        np.add(h, np.float32(360), out=h, where=h < 0)
        o[:, 2] = h
    return out.reshape(rgb8.shape)


def pack_rgb8(rgb8: np.ndarray) -> np.ndarray:
    """uint8 (..., 3) -> uint32 (...) as 0xRRGGBB."""
    rgb8 = np.asarray(rgb8, dtype=np.uint8)
    return ((rgb8[..., 0].astype(np.uint32) << 16) | (rgb8[..., 1].astype(np.uint32) << 8)
            | rgb8[..., 2].astype(np.uint32))


def unpack_rgb8(packed: np.ndarray) -> np.ndarray:
    """uint32 0xRRGGBB (...) -> uint8 (..., 3)."""
    p = np.asarray(packed, dtype=np.uint32)
    return np.stack([(p >> 16) & 255, (p >> 8) & 255, p & 255], axis=-1).astype(np.uint8)


def color_counts(rgb8: np.ndarray, weights: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Distinct colours of an 8-bit image and how often each occurs.

    Returns ``(packed, counts)``: sorted uint32 0xRRGGBB codes and float64 counts (or summed
    ``weights`` of the same shape as the image without its channel axis). Counts merge across
    windows by adding where codes match (see ``compose.check.stats``).
    """
    packed = pack_rgb8(rgb8).ravel()
    codes, inverse = np.unique(packed, return_inverse=True)
    w = None if weights is None else np.asarray(weights, dtype=float).ravel()
    counts = np.bincount(inverse, weights=w, minlength=codes.size).astype(float)
    return codes, counts


def lab_of_packed(codes: np.ndarray) -> np.ndarray:
    """CIELAB (n, 3) of packed 0xRRGGBB codes (n,) -- only the distinct colours are converted."""
    return srgb_to_lab(unpack_rgb8(codes) / 255.0)


def lch_of_packed(codes: np.ndarray) -> np.ndarray:
    """CIE LCh(ab) (n, 3) of packed 0xRRGGBB codes (n,)."""
    return lab_to_lch(lab_of_packed(codes))


__all__.append("lch_of_packed")
