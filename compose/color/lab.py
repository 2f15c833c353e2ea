"""CIE XYZ <-> CIELAB <-> CIE LCh(ab), D65, 2 degree observer.

CIELAB per CIE 15 / ISO/CIE 11664-4: L* = 116 f(Y/Yn) - 16 with f(t) = t^(1/3) above (6/29)^3 and
the linear segment below. The reference white is D65 from its chromaticity x, y = 0.3127, 0.3290
(CIE 15), i.e. Xn, Yn, Zn = 0.95046, 1, 1.08906 -- the colour-science default.

Units: L* in [0, 100]; a*, b*, C*ab unbounded (sRGB reaches about 134); h in degrees [0, 360).
"""
from __future__ import annotations

import numpy as np

from compose.color.srgb import srgb_to_xyz, xyz_to_srgb

__all__ = [
    "WHITE_D65", "xyz_to_lab", "lab_to_xyz", "lab_to_lch", "lch_to_lab",
    "srgb_to_lab", "lab_to_srgb", "srgb_to_lch", "lch_to_srgb",
]

# D65 chromaticity (CIE 15:2004): x = 0.3127, y = 0.3290; XYZ with Y = 1.
_X, _Y = 0.3127, 0.3290
WHITE_D65 = np.array([_X / _Y, 1.0, (1.0 - _X - _Y) / _Y])

_EPS = (6 / 29) ** 3          # CIE 15: t above which f(t) = t^(1/3)
_K = 1 / (3 * (6 / 29) ** 2)  # slope of the linear segment


def _f(t: np.ndarray) -> np.ndarray:
    return np.where(t > _EPS, np.cbrt(t), t * _K + 4 / 29)


def _f_inv(f: np.ndarray) -> np.ndarray:
    return np.where(f > 6 / 29, f ** 3, (f - 4 / 29) / _K)


def xyz_to_lab(xyz, white=WHITE_D65) -> np.ndarray:
    """CIE XYZ (Y of white = 1) (..., 3) -> CIELAB (L* in [0, 100], a*, b*) (..., 3)."""
    xyz = np.asarray(xyz, dtype=float)
    f = _f(xyz / white)
    L = 116 * f[..., 1] - 16
    a = 500 * (f[..., 0] - f[..., 1])
    b = 200 * (f[..., 1] - f[..., 2])
    return np.stack([L, a, b], axis=-1)


def lab_to_xyz(lab, white=WHITE_D65) -> np.ndarray:
    """CIELAB (..., 3) -> CIE XYZ with Y of white = 1 (..., 3)."""
    lab = np.asarray(lab, dtype=float)
    fy = (lab[..., 0] + 16) / 116
    fx = fy + lab[..., 1] / 500
    fz = fy - lab[..., 2] / 200
    return np.stack([_f_inv(fx), _f_inv(fy), _f_inv(fz)], axis=-1) * white


def lab_to_lch(lab) -> np.ndarray:
    """CIELAB (..., 3) -> CIE LCh(ab): L*, C*ab >= 0, h in degrees [0, 360)."""
    lab = np.asarray(lab, dtype=float)
    C = np.hypot(lab[..., 1], lab[..., 2])
    h = np.degrees(np.arctan2(lab[..., 2], lab[..., 1])) % 360.0
    h = np.where(h >= 360.0, h - 360.0, h)  # a tiny negative angle % 360 rounds to 360.0
    return np.stack([lab[..., 0], C, h], axis=-1)


def lch_to_lab(lch) -> np.ndarray:
    """CIE LCh(ab) (L*, C*ab, h in degrees) (..., 3) -> CIELAB (..., 3)."""
    lch = np.asarray(lch, dtype=float)
    h = np.radians(lch[..., 2])
    return np.stack([lch[..., 0], lch[..., 1] * np.cos(h), lch[..., 1] * np.sin(h)], axis=-1)


def srgb_to_lab(rgb) -> np.ndarray:
    """Gamma-encoded sRGB in [0, 1] (..., 3) -> CIELAB (..., 3)."""
    return xyz_to_lab(srgb_to_xyz(rgb))


def lab_to_srgb(lab) -> np.ndarray:
    """CIELAB (..., 3) -> gamma-encoded sRGB (..., 3), unclipped (see ``gamut`` for mapping)."""
    return xyz_to_srgb(lab_to_xyz(lab))


def srgb_to_lch(rgb) -> np.ndarray:
    """Gamma-encoded sRGB in [0, 1] (..., 3) -> CIE LCh(ab) (..., 3)."""
    return lab_to_lch(srgb_to_lab(rgb))


def lch_to_srgb(lch) -> np.ndarray:
    """CIE LCh(ab) (..., 3) -> gamma-encoded sRGB (..., 3), unclipped."""
    return lab_to_srgb(lch_to_lab(lch))
