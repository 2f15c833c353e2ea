"""Colour-vision-deficiency simulation, Machado, Oliveira & Fernandes (2009).

The matrices are the authors' precomputed supplementary matrices for severities 0.0, 0.1, ... 1.0
(as tabulated in colorspacious, which cites the same supplementary page). They act on *linear*
RGB column vectors; between tabulated severities they are interpolated linearly, as both
colorspacious and colour-science do. Severity is given in percent, 0-100 (100 = dichromacy).
Results are clipped to [0, 1] in linear RGB -- the simulated colour of a display pixel is always
displayable -- and re-encoded to sRGB.
"""
from __future__ import annotations

import numpy as np

from compose.color.srgb import linear_to_srgb, srgb_to_linear

__all__ = ["CVD_KINDS", "cvd_matrix", "simulate_cvd", "simulate_cvd_linear"]

CVD_KINDS = {"protan": "protanomaly", "deutan": "deuteranomaly", "tritan": "tritanomaly"}


def cvd_matrix(kind: str, severity: float = 100.0) -> np.ndarray:
    """The 3 x 3 linear-RGB matrix for ``kind`` in {protan, deutan, tritan} at ``severity`` in [0, 100]."""
    if kind not in CVD_KINDS:
        raise ValueError(f"'{kind}' is not a colour-vision deficiency; one of: {', '.join(CVD_KINDS)}")
    if not 0 <= severity <= 100:
        raise ValueError(f"severity must be in [0, 100], got {severity}")
    from colorspacious.cvd import MACHADO_ET_AL_MATRICES  # on first use: not at a style's load

    table = MACHADO_ET_AL_MATRICES[CVD_KINDS[kind]]
    low = int(np.floor(severity / 10.0)) * 10
    if low >= 100:
        return np.asarray(table[100], dtype=float)
    frac = (severity - low) / 10.0
    m_low = np.asarray(table[low], dtype=float)
    m_high = np.asarray(table[low + 10], dtype=float)
    return (1 - frac) * m_low + frac * m_high


def simulate_cvd_linear(lin, kind: str, severity: float = 100.0) -> np.ndarray:
    """Simulate CVD on linear RGB (..., 3) in [0, 1]; result clipped to [0, 1] (linear)."""
    out = np.asarray(lin, dtype=float) @ cvd_matrix(kind, severity).T
    return np.clip(out, 0.0, 1.0)


def simulate_cvd(rgb, kind: str, severity: float = 100.0) -> np.ndarray:
    """Simulate CVD on gamma-encoded sRGB (..., 3) in [0, 1] -> gamma-encoded sRGB in [0, 1]."""
    return linear_to_srgb(simulate_cvd_linear(srgb_to_linear(rgb), kind, severity))
