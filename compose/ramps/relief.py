"""The relief's colour ramp: shade (0 = facing away from the sun, 1 = facing it) -> colour.

Shared by the relief layer (:mod:`compose.layers.relief`, which draws through it) and the checker
(:mod:`compose.check.fixes`, which re-draws a measured relief with other colours to find a fix).
Flat ground (shade = sin(altitude)) is drawn in the ``tint``; faces turned away from the sun move
toward the ``shadow`` colour by ``strength``; faces turned toward it move a little toward a
highlight. The ramp is interpolated in CIELAB, so the relief stays light and low in chroma by
construction.
"""
from __future__ import annotations

import numpy as np

from compose.color.gamut import max_chroma
from compose.color.lab import lab_to_srgb, lch_to_srgb, srgb_to_lab, srgb_to_lch
from compose.color.parse import to_rgb8

__all__ = ["LEVELS", "relief_colors", "default_shadow"]

LEVELS = 1024   # shade levels of the relief's lookup table

RGB = tuple[float, float, float]


def relief_colors(tint: RGB, shadow: RGB, strength: float,
                  altitude: float) -> tuple[np.ndarray, np.ndarray]:
    """(rgb8 (LEVELS, 3) uint8, shade (LEVELS,) in [0, 1]) of the relief drawn from ``tint``
    toward ``shadow`` by up to ``strength`` (0-1), with the sun ``altitude`` degrees high."""
    s = np.linspace(0.0, 1.0, LEVELS)
    flat = np.sin(np.radians(altitude))
    lab_tint = srgb_to_lab(np.asarray(tint, dtype=float))
    lab_shadow = srgb_to_lab(np.asarray(shadow, dtype=float))
    lab_light = lab_tint.copy()
    lab_light[0] = lab_tint[0] + (100.0 - lab_tint[0]) * 0.6
    lab_light[1:] *= 0.7
    dark = strength * np.clip((flat - s) / flat, 0.0, 1.0)                  # 0 at flat, strength at s=0
    light = strength * np.clip((s - flat) / max(1e-6, 1.0 - flat), 0.0, 1.0)
    lab = lab_tint + dark[:, None] * (lab_shadow - lab_tint) + light[:, None] * (lab_light - lab_tint)
    return to_rgb8(lab_to_srgb(lab)), s


def default_shadow(tint: RGB) -> RGB:
    """The default relief shadow: the tint at half its L* and half its C* (at most 6), same hue.

    Our own choice (no source): with the default strength 0.6 a tint of L* 95 shades down to about
    L* 66, inside the ground lightness budget. Chroma is capped to what sRGB shows at that L*.
    """
    L, C, h = (float(v) for v in srgb_to_lch(np.asarray(tint, dtype=float)))
    L2 = 0.5 * L
    C2 = float(max_chroma(L2, h, iterations=16, top=min(0.5 * C, 6.0)))   # largest shown <= that
    rgb = np.clip(lch_to_srgb(np.array([L2, C2, h])), 0.0, 1.0)
    return (float(rgb[0]), float(rgb[1]), float(rgb[2]))
