"""CAM02-UCS (Luo, Cui & Li 2006) through colorspacious, under sRGB viewing conditions.

Viewing conditions: adapting luminance L_A = 64/pi * 0.2 ~ 4.07 cd/m^2, background Y_b = 20,
average surround, white = our D65 white (``lab.WHITE_D65`` scaled to Y = 100) -- the sRGB
reference conditions colorspacious and colour-science both default to. Going through our own XYZ
keeps one sRGB convention across the engine.

Units: J' in about [0, 100], a' and b' roughly in [-40, 45] for sRGB colours.
"""
from __future__ import annotations

import functools
from typing import Any

import numpy as np

from compose.color.lab import WHITE_D65
from compose.color.srgb import srgb_to_xyz, xyz_to_srgb

__all__ = ["xyz_to_cam02ucs", "cam02ucs_to_xyz", "srgb_to_cam02ucs", "cam02ucs_to_srgb"]

_XYZ100 = "XYZ100"


@functools.cache
def _space() -> tuple[Any, dict, Any]:
    """(viewing conditions, the CAM02-UCS space, colorspacious's cspace_convert), colorspacious
    imported on first use: loading a style (the draft check before its fork) converts nothing."""
    from colorspacious import CIECAM02Space, CIECAM02Surround, cspace_convert

    viewing = CIECAM02Space(XYZ100_w=WHITE_D65 * 100.0, Y_b=20.0, L_A=(64 / np.pi) / 5.0,
                            surround=CIECAM02Surround.AVERAGE)
    return viewing, {"name": "CAM02-UCS", "ciecam02_space": viewing}, cspace_convert


def __getattr__(name: str) -> Any:
    if name == "VIEWING":       # sRGB viewing conditions (colorspacious's CIECAM02Space)
        return _space()[0]
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def xyz_to_cam02ucs(xyz) -> np.ndarray:
    """CIE XYZ (Y of white = 1) (..., 3) -> CAM02-UCS J', a', b' (..., 3)."""
    _, ucs, convert = _space()
    return np.asarray(convert(np.asarray(xyz, dtype=float) * 100.0, _XYZ100, ucs))


def cam02ucs_to_xyz(jab) -> np.ndarray:
    """CAM02-UCS J', a', b' (..., 3) -> CIE XYZ with Y of white = 1 (..., 3)."""
    _, ucs, convert = _space()
    return np.asarray(convert(np.asarray(jab, dtype=float), ucs, _XYZ100)) / 100.0


def srgb_to_cam02ucs(rgb) -> np.ndarray:
    """Gamma-encoded sRGB in [0, 1] (..., 3) -> CAM02-UCS J', a', b' (..., 3)."""
    return xyz_to_cam02ucs(srgb_to_xyz(rgb))


def cam02ucs_to_srgb(jab) -> np.ndarray:
    """CAM02-UCS J', a', b' (..., 3) -> gamma-encoded sRGB (..., 3), unclipped."""
    return xyz_to_srgb(cam02ucs_to_xyz(jab))
