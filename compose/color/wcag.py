"""WCAG 2 relative luminance and contrast ratio (W3C WCAG 2.2, definitions).

relative luminance = 0.2126 R + 0.7152 G + 0.0722 B of linearised sRGB (threshold 0.04045),
in [0, 1]; contrast ratio = (L1 + 0.05) / (L2 + 0.05) with L1 the lighter, in [1, 21].
Thresholds are not rounded: 2.999:1 does not meet 3:1 (WCAG understanding documents).
"""
from __future__ import annotations

import numpy as np

from compose.color.srgb import srgb_to_linear

__all__ = ["WCAG_Y", "relative_luminance", "contrast_ratio", "contrast_from_luminance"]

WCAG_Y = np.array([0.2126, 0.7152, 0.0722])  # WCAG 2.x relative-luminance weights


def relative_luminance(rgb) -> np.ndarray:
    """WCAG relative luminance of gamma-encoded sRGB in [0, 1] (..., 3) -> (...) in [0, 1]."""
    return srgb_to_linear(rgb) @ WCAG_Y


def contrast_from_luminance(y1, y2) -> np.ndarray:
    """Contrast ratio in [1, 21] from two relative luminances (order does not matter)."""
    y1 = np.asarray(y1, dtype=float)
    y2 = np.asarray(y2, dtype=float)
    return (np.maximum(y1, y2) + 0.05) / (np.minimum(y1, y2) + 0.05)


def contrast_ratio(rgb1, rgb2) -> np.ndarray:
    """WCAG 2 contrast ratio in [1, 21] between two gamma-encoded sRGB colours (..., 3)."""
    return contrast_from_luminance(relative_luminance(rgb1), relative_luminance(rgb2))
