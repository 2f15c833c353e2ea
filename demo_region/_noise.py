"""Seeded smooth random fields for the demo-region generator (dev script, not part of compose).

Every field comes from its own random stream, ``numpy.random.default_rng([seed, tag])``, so adding
or changing one field never changes another.
"""

from __future__ import annotations

import numpy as np

__all__ = ["rng_for", "spectral_noise", "smoothstep", "chaikin", "chaikin_closed", "smooth_line"]


def rng_for(seed: int, tag: int) -> np.random.Generator:
    """The random stream for field number ``tag`` under ``seed``."""
    return np.random.default_rng([seed, tag])


def spectral_noise(
    rng: np.random.Generator,
    shape: tuple[int, int],
    cell: float,
    beta: float,
    longest: float,
    shortest: float,
) -> np.ndarray:
    """Fractal noise by spectral synthesis, zero mean and unit standard deviation.

    White Gaussian noise is filtered in the Fourier domain by ``k ** (-beta / 2)`` (power spectrum
    ``k ** -beta``), with soft cut-offs at wavelengths ``longest`` and ``shortest`` (same unit as
    ``cell``, the cell size). The field is synthesised on a grid padded to 1.4 x ``shape`` and
    cropped, so opposite edges of the result are not correlated by the FFT's periodicity.
    Returns float64 of ``shape``.
    """
    ny, nx = shape
    py, px = _fft_size(int(ny * 1.4)), _fft_size(int(nx * 1.4))
    white = rng.standard_normal((py, px))
    ky = np.fft.fftfreq(py, d=cell)[:, None]
    kx = np.fft.rfftfreq(px, d=cell)[None, :]
    k = np.hypot(ky, kx)
    k[0, 0] = 1.0
    amp = k ** (-beta / 2.0)
    k_lo, k_hi = 1.0 / longest, 1.0 / shortest
    amp *= 1.0 - np.exp(-((k / k_lo) ** 4))          # soft high-pass at the longest wavelength
    amp *= np.exp(-((k / k_hi) ** 2))                 # soft low-pass at the shortest wavelength
    amp[0, 0] = 0.0
    field = np.fft.irfft2(np.fft.rfft2(white) * amp, s=(py, px))[:ny, :nx]
    field -= field.mean()
    std = field.std()
    return field / std if std > 0 else field


def _fft_size(n: int) -> int:
    """Smallest 2^a * 3^b >= n (fast FFT sizes)."""
    best = 1 << (n - 1).bit_length()
    p3 = 1
    while p3 < best:
        p2 = p3
        while p2 < n:
            p2 *= 2
        best = min(best, p2)
        p3 *= 3
    return best


def smoothstep(t: np.ndarray | float) -> np.ndarray:
    """Cubic Hermite step, 0 for t <= 0, 1 for t >= 1."""
    t = np.clip(t, 0.0, 1.0)
    return t * t * (3.0 - 2.0 * t)


def chaikin(xy: np.ndarray, iterations: int = 3) -> np.ndarray:
    """Chaikin corner cutting of an open polyline (n, 2); both end points are kept."""
    pts = np.asarray(xy, dtype=float)
    for _ in range(iterations):
        if len(pts) < 3:
            return pts
        a, b = pts[:-1], pts[1:]
        q = 0.75 * a + 0.25 * b
        r = 0.25 * a + 0.75 * b
        mid = np.empty((2 * len(a), 2))
        mid[0::2], mid[1::2] = q, r
        pts = np.vstack([pts[:1], mid, pts[-1:]])
    return pts


def chaikin_closed(xy: np.ndarray, iterations: int = 3) -> np.ndarray:
    """Chaikin corner cutting of a closed ring given without its repeated end point (n, 2)."""
    pts = np.asarray(xy, dtype=float)
    for _ in range(iterations):
        a, b = pts, np.roll(pts, -1, axis=0)
        out = np.empty((2 * len(a), 2))
        out[0::2], out[1::2] = 0.75 * a + 0.25 * b, 0.25 * a + 0.75 * b
        pts = out
    return pts


def smooth_line(xy: np.ndarray, window: int = 5) -> np.ndarray:
    """Moving average of an open polyline's vertices (n, 2); both end points are kept."""
    pts = np.asarray(xy, dtype=float)
    if len(pts) <= 2 or window < 2:
        return pts
    half = window // 2
    padded = np.vstack([np.repeat(pts[:1], half, axis=0), pts, np.repeat(pts[-1:], half, axis=0)])
    kernel = np.ones(2 * half + 1) / (2 * half + 1)
    out = np.column_stack([np.convolve(padded[:, k], kernel, mode="valid") for k in range(2)])
    out[0], out[-1] = pts[0], pts[-1]
    return out
