"""Colour curves through a few stops: interpolation, gamut mapping, arc-length re-parametrisation.

A curve is a dense polyline of colours. Stops are given in CIE LCh(ab) (D65); they are moved into
the interpolation space (CAM02-UCS J'a'b' or CIELAB L*a*b*), joined by a shape-preserving
piecewise cubic (Fritsch & Carlson 1980, "monotone piecewise cubic interpolation", SIAM J. Numer.
Anal. 17(2)) over chord-length knots -- so a coordinate that is monotone through the stops stays
monotone between them (lightness does not overshoot) -- then brought back to LCh and mapped into
sRGB by lowering chroma only (:func:`compose.color.gamut.map_to_gamut`).

Perceived distance along a curve is measured in CAM02-UCS (Luo, Cui & Li 2006) whatever the
interpolation space: Euclidean distance there approximates a uniform colour difference.
"""
from __future__ import annotations

import numpy as np

from compose.color.cam import cam02ucs_to_xyz, srgb_to_cam02ucs, xyz_to_cam02ucs
from compose.color.gamut import map_to_gamut
from compose.color.lab import lab_to_lch, lab_to_srgb, lab_to_xyz, lch_to_lab, xyz_to_lab

__all__ = ["SPACES", "DENSE", "to_space", "from_space", "pchip", "dense_curve", "arc_fraction",
           "resample", "lab_to_ucs"]

SPACES = ("cam02ucs", "cielab")
DENSE = 2049  # knots of a dense curve; steps of 1/2048 of the ramp are far below one JND


def to_space(lch: np.ndarray, space: str) -> np.ndarray:
    """CIE LCh(ab) (..., 3) -> coordinates of the interpolation ``space`` (..., 3)."""
    lab = lch_to_lab(lch)
    if space == "cielab":
        return lab
    return xyz_to_cam02ucs(lab_to_xyz(lab))


def from_space(coords: np.ndarray, space: str) -> np.ndarray:
    """Coordinates of ``space`` (..., 3) -> CIELAB (..., 3) (not gamut mapped)."""
    if space == "cielab":
        return np.asarray(coords, dtype=float)
    return xyz_to_lab(np.maximum(cam02ucs_to_xyz(coords), 0.0))


def lab_to_ucs(lab: np.ndarray) -> np.ndarray:
    """CIELAB (..., 3) -> CAM02-UCS J'a'b' (..., 3)."""
    return xyz_to_cam02ucs(lab_to_xyz(lab))


def pchip(x: np.ndarray, y: np.ndarray, xi: np.ndarray) -> np.ndarray:
    """Shape-preserving piecewise cubic Hermite interpolation (Fritsch & Carlson 1980).

    ``x`` (n,) strictly increasing knots, ``y`` (n, m) values, ``xi`` (k,) query points inside
    [x0, x_{n-1}]. Returns (k, m). Slopes: weighted harmonic mean of the neighbouring secants where
    they agree in sign, zero at local extrema; one-sided three-point slopes at the ends, limited
    so the end intervals stay monotone. With two knots it is linear interpolation.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float).reshape(len(x), -1)
    xi = np.asarray(xi, dtype=float)
    h = np.diff(x)
    delta = np.diff(y, axis=0) / h[:, None]
    n = len(x)
    d = np.zeros_like(y)
    if n == 2:
        d[:] = delta[0]
    else:
        w1 = (2 * h[1:] + h[:-1])[:, None]
        w2 = (h[1:] + 2 * h[:-1])[:, None]
        same = (delta[:-1] * delta[1:]) > 0
        with np.errstate(divide="ignore", invalid="ignore"):
            hm = (w1 + w2) / (w1 / delta[:-1] + w2 / delta[1:])
        d[1:-1] = np.where(same, hm, 0.0)
        for end, (h0, h1, d0, d1) in {0: (h[0], h[1], delta[0], delta[1]),
                                      -1: (h[-1], h[-2], delta[-1], delta[-2])}.items():
            s = ((2 * h0 + h1) * d0 - h0 * d1) / (h0 + h1)
            s = np.where(np.sign(s) != np.sign(d0), 0.0, s)
            s = np.where((np.sign(d0) != np.sign(d1)) & (np.abs(s) > 3 * np.abs(d0)), 3 * d0, s)
            d[end] = s
    k = np.clip(np.searchsorted(x, xi, side="right") - 1, 0, n - 2)
    t = ((xi - x[k]) / h[k])[:, None]
    hk = h[k][:, None]
    t2, t3 = t * t, t * t * t
    return ((2 * t3 - 3 * t2 + 1) * y[k] + (t3 - 2 * t2 + t) * hk * d[k]
            + (-2 * t3 + 3 * t2) * y[k + 1] + (t3 - t2) * hk * d[k + 1])


def dense_curve(stops_lch: np.ndarray, space: str, n: int = DENSE) -> tuple[np.ndarray, np.ndarray]:
    """Dense gamut-mapped curve through ``stops_lch`` (m, 3), m >= 2, in interpolation ``space``.

    Returns ``(lab, removed)``: CIELAB (n, 3) of the displayable colours and the C*ab removed by
    gamut mapping at each knot (n,). Knots are spaced by chord length between stops in ``space``
    (coincident stops get a tiny spacing so the knots stay increasing).
    """
    coords = to_space(np.asarray(stops_lch, dtype=float), space)
    chord = np.sqrt(np.sum(np.diff(coords, axis=0) ** 2, axis=-1))
    chord = np.maximum(chord, 1e-6)
    knots = np.concatenate([[0.0], np.cumsum(chord)])
    knots /= knots[-1]
    dense = pchip(knots, coords, np.linspace(0.0, 1.0, n))
    lch = lab_to_lch(from_space(dense, space))
    mapped, removed = map_to_gamut(lch)
    lab = lch_to_lab(mapped)
    return lab, removed


def arc_fraction(lab: np.ndarray) -> np.ndarray:
    """Cumulative CAM02-UCS distance along a polyline of CIELAB colours (n, 3), scaled to [0, 1].

    Distances are measured between the displayable colours (gamut-mapped, unclipped floats).
    A curve of zero length gives evenly spaced fractions.
    """
    ucs = srgb_to_cam02ucs(np.clip(lab_to_srgb(lab), 0.0, 1.0))
    step = np.sqrt(np.sum(np.diff(ucs, axis=0) ** 2, axis=-1))
    s = np.concatenate([[0.0], np.cumsum(step)])
    if s[-1] <= 0:
        return np.linspace(0.0, 1.0, len(lab))
    return s / s[-1]


def resample(param: np.ndarray, arrays: tuple[np.ndarray, ...], n: int = DENSE) -> tuple[np.ndarray, ...]:
    """Resample arrays (k, ...) given at non-decreasing ``param`` (k,) in [0, 1] at n even steps.

    Linear interpolation per component; repeated parameter values (zero-length pieces) are skipped.
    """
    param = np.asarray(param, dtype=float)
    keep = np.concatenate([[True], np.diff(param) > 0])
    p = param[keep]
    target = np.linspace(p[0], p[-1], n)
    out = []
    for a in arrays:
        a = np.asarray(a, dtype=float)[keep]
        flat = a.reshape(len(p), -1)
        res = np.stack([np.interp(target, p, flat[:, j]) for j in range(flat.shape[1])], axis=-1)
        out.append(res.reshape((n,) + a.shape[1:]))
    return tuple(out)
