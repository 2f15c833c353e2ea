"""sRGB (IEC 61966-2-1:1999) <-> linear RGB <-> CIE XYZ (D65).

Convention pinned for the whole engine (see ``docs/color.md``):

* transfer function of IEC 61966-2-1 (decode threshold 0.04045, encode threshold 0.0031308);
* the 4-digit RGB -> XYZ matrix of IEC 61966-2-1 and its exact numerical inverse;
* XYZ scaled so that Y of the white is 1.

This is the colour-science default, so our values agree with it to rounding.
All sRGB values are gamma-encoded floats in [0, 1] (8-bit code / 255); arrays have shape (..., 3).
"""
from __future__ import annotations

import numpy as np

__all__ = [
    "M_RGB_TO_XYZ", "M_XYZ_TO_RGB", "srgb_to_linear", "linear_to_srgb",
    "linear_to_xyz", "xyz_to_linear", "srgb_to_xyz", "xyz_to_srgb",
]

# IEC 61966-2-1:1999, 4-digit matrix, linear sRGB -> XYZ (D65), Y of white = 1.
M_RGB_TO_XYZ = np.array([
    [0.4124, 0.3576, 0.1805],
    [0.2126, 0.7152, 0.0722],
    [0.0193, 0.1192, 0.9505],
])
M_XYZ_TO_RGB = np.linalg.inv(M_RGB_TO_XYZ)


def srgb_to_linear(rgb) -> np.ndarray:
    """Decode gamma-encoded sRGB in [0, 1] to linear light in [0, 1] (IEC 61966-2-1 EOTF).

    Values outside [0, 1] are extended symmetrically (sign-preserving) and never clipped.
    """
    c = np.asarray(rgb, dtype=float)
    a = np.abs(c)
    lin = np.where(a <= 0.04045, a / 12.92, ((a + 0.055) / 1.055) ** 2.4)
    return np.copysign(lin, c)


def linear_to_srgb(lin) -> np.ndarray:
    """Encode linear light in [0, 1] to gamma-encoded sRGB in [0, 1] (inverse EOTF), unclipped."""
    c = np.asarray(lin, dtype=float)
    a = np.abs(c)
    enc = np.where(a <= 0.0031308, 12.92 * a, 1.055 * a ** (1 / 2.4) - 0.055)
    return np.copysign(enc, c)


def linear_to_xyz(lin) -> np.ndarray:
    """Linear sRGB (..., 3) -> CIE XYZ (..., 3), D65, Y in [0, 1]."""
    return np.asarray(lin, dtype=float) @ M_RGB_TO_XYZ.T


def xyz_to_linear(xyz) -> np.ndarray:
    """CIE XYZ (..., 3), D65, Y in [0, 1] -> linear sRGB (..., 3), unclipped."""
    return np.asarray(xyz, dtype=float) @ M_XYZ_TO_RGB.T


def srgb_to_xyz(rgb) -> np.ndarray:
    """Gamma-encoded sRGB in [0, 1] (..., 3) -> CIE XYZ, D65, Y in [0, 1]."""
    return linear_to_xyz(srgb_to_linear(rgb))


def xyz_to_srgb(xyz) -> np.ndarray:
    """CIE XYZ, D65, Y in [0, 1] -> gamma-encoded sRGB (..., 3), unclipped (may leave [0, 1])."""
    return linear_to_srgb(xyz_to_linear(xyz))
