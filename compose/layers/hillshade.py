"""Hillshade of a DEM: Horn's 3x3 gradient and Lambertian illumination.

Source: B. K. P. Horn, "Hill shading and the reflectance map", Proc. IEEE 69(1):14-47, 1981
(the weighted 3x3 differences and the matte reflectance map; worked numbers in
/work/shared/references.md section 6).

Conventions: DEM rows run north -> south (row 0 is north), columns west -> east. ``dx`` (east) and
``dy`` (north) are cell sizes in metres, the same unit as the elevations. ``dx`` may be a scalar
or an array of shape (H, 1) (or (H,)) for geographic grids whose east-west cell size shrinks with
latitude. Azimuths are degrees clockwise from north, altitudes degrees above the horizon.

Everything is float32 and computed in strips of rows (``STRIP_ROWS``) so the working set stays
in cache; results equal a whole-array computation exactly (each output row only depends on its
own 3x3 neighbourhood).
"""
from __future__ import annotations

import functools
import math

import numpy as np

from compose.kernels import get as compiled

__all__ = ["STRIP_ROWS", "STRETCH_TARGET", "MAX_STRETCH", "horn_gradient", "centre_gradient",
           "shade_gradient", "hillshade",
           "multidirectional", "flat_normalised", "shade_spread", "stretch_factor"]

#: What "auto" stretch aims at: the 95th percentile of |shade - sin(altitude)| over the DEM.
#: 0.35 is about what a plain Horn hillshade of hilly-to-mountainous terrain shows at 30 m cells
#: (measured on the demo region: 0.40), i.e. an ordinary, readable relief (our choice, no source).
STRETCH_TARGET = 0.35
#: The largest vertical factor "auto" stretch applies (a plain plain stays plain).
MAX_STRETCH = 100.0

#: Rows per strip. 32 rows x 8192 columns x 4 bytes = 1 MiB per buffer: a handful of buffers
#: stays in a typical L2/L3 (measured on the project machine; common practice, no source).
STRIP_ROWS = 32


def _cell_sizes(dem: np.ndarray, dx, dy) -> tuple[np.ndarray | float, float]:
    """Validate ``dx``/``dy``; return dx as a float or a float64 (H, 1) array, dy as a float."""
    if dem.ndim != 2:
        raise ValueError(f"dem must be 2-D (H, W), got shape {dem.shape}")
    dy = float(dy)
    if not dy > 0:
        raise ValueError(f"dy must be > 0, got {dy}")
    dxa = np.asarray(dx, dtype=np.float64)
    if dxa.ndim == 0:
        dxs = float(dxa)
        if not dxs > 0:
            raise ValueError(f"dx must be > 0, got {dxs}")
        return dxs, dy
    dxa = dxa.reshape(-1, 1)
    if dxa.shape[0] != dem.shape[0]:
        raise ValueError(f"dx has {dxa.shape[0]} rows, dem has {dem.shape[0]}")
    if not np.all(dxa > 0):
        raise ValueError("dx must be > 0 in every row")
    return dxa, dy


class _Strips:
    """Reusable buffers and the Horn gradient of one strip of rows."""

    def __init__(self, dem: np.ndarray, dx, dy: float):
        self.dem = dem
        self.h, self.w = dem.shape
        self.dx = dx
        self.dy = dy
        n = min(STRIP_ROWS, self.h)
        self.pad = np.empty((n + 2, self.w + 2), np.float32)
        self.v = np.empty((n, self.w + 2), np.float32)   # vertical [1 2 1] sums
        self.hz = np.empty((n + 2, self.w), np.float32)  # horizontal [1 2 1] sums
        self.p = np.empty((n, self.w), np.float32)
        self.q = np.empty((n, self.w), np.float32)

    def _fill(self, r0: int, r1: int) -> np.ndarray:
        """Rows r0-1 .. r1 of the DEM, edges replicated (np.pad mode='edge'), as float32."""
        n = r1 - r0
        pad = self.pad[: n + 2]
        lo, hi = max(r0 - 1, 0), min(r1 + 1, self.h)
        top = 1 if r0 == 0 else 0          # rows of pad to replicate at the top
        pad[top: top + hi - lo, 1:-1] = self.dem[lo:hi]
        if top:
            pad[0, 1:-1] = pad[1, 1:-1]
        if r1 == self.h:
            pad[n + 1, 1:-1] = pad[n, 1:-1]
        pad[:, 0] = pad[:, 1]
        pad[:, -1] = pad[:, -2]
        return pad

    def gradient(self, r0: int, r1: int) -> tuple[np.ndarray, np.ndarray]:
        """dz/dx (east) and dz/dy (north) of rows r0..r1 as views into reused buffers."""
        n = r1 - r0
        z = self._fill(r0, r1)
        p, q = self.p[:n], self.q[:n]
        dx = self.dx if np.ndim(self.dx) == 0 else self.dx[r0:r1]
        # Horn: dz/dx = ((c + 2f + i) - (a + 2d + g)) / 8dx, separable as a vertical [1 2 1]
        # sum followed by a horizontal difference; dz/dy likewise with (top - bottom) since
        # row 0 is north.
        v = self.v[:n]
        np.add(z[:-2], z[2:], out=v)
        v += z[1:-1]
        v += z[1:-1]
        np.subtract(v[:, 2:], v[:, :-2], out=p)
        hz = self.hz[: n + 2]
        np.add(z[:, :-2], z[:, 2:], out=hz)
        hz += z[:, 1:-1]
        hz += z[:, 1:-1]
        np.subtract(hz[:-2], hz[2:], out=q)
        # Every cell of the padded strip reaches p, so a NaN anywhere shows in its (cheap,
        # in-cache) sum; only then take the slower NaN-aware path.
        if not np.isfinite(p.sum()):
            _gradient_nan(z, p, q)
        p *= (1.0 / (8.0 * dx)) if np.ndim(dx) == 0 else (1.0 / (8.0 * dx)).astype(np.float32)
        q *= np.float32(1.0 / (8.0 * self.dy))
        return p, q


def _gradient_nan(z: np.ndarray, p: np.ndarray, q: np.ndarray) -> None:
    """Redo the Horn gradient, in place, of the cells of a padded strip next to NaN.

    A NaN neighbour is replaced by reflecting its opposite neighbour through the centre
    (``2e - opposite``), or by the centre value when the opposite is NaN too. The reflection keeps
    the gradient of a plane exact next to a hole, so a NaN cell costs only itself; cells whose
    centre is NaN come out NaN. Only cells whose first pass gave NaN are recomputed (gathered by
    index), so the cost follows the length of the no-data border, not the strip.
    """
    centre_nan = np.isnan(z[1:-1, 1:-1])
    bad = np.isnan(p)
    bad |= np.isnan(q)
    bad &= ~centre_nan
    r, c = np.nonzero(bad)
    r += 1
    c += 1
    p[r - 1, c - 1], q[r - 1, c - 1] = _reflected(lambda a, b: z[r + a, c + b])
    p[centre_nan] = np.nan
    q[centre_nan] = np.nan


def _reflected(near) -> tuple[np.ndarray, np.ndarray]:
    """Horn's (unscaled) differences of cells next to NaN (:func:`_gradient_nan`): ``near(a, b)``
    gives the cells (a, b) away from the centres (a, b in -1, 0, 1; float32, one shape)."""
    e = near(0, 0)
    f = {}
    for a, b in (((-1, -1), (1, 1)), ((-1, 0), (1, 0)), ((-1, 1), (1, -1)), ((0, -1), (0, 1))):
        za, zb = near(*a), near(*b)
        na, nb = np.isnan(za), np.isnan(zb)
        f[a] = np.where(na, np.where(nb, e, 2 * e - zb), za)
        f[b] = np.where(nb, np.where(na, e, 2 * e - za), zb)
    return ((f[-1, 1] + 2 * f[0, 1] + f[1, 1]) - (f[-1, -1] + 2 * f[0, -1] + f[1, -1]),
            (f[-1, -1] + 2 * f[-1, 0] + f[-1, 1]) - (f[1, -1] + 2 * f[1, 0] + f[1, 1]))


def horn_gradient(dem: np.ndarray, dx, dy) -> tuple[np.ndarray, np.ndarray]:
    """Horn (1981) gradient of a north-up DEM.

    dem: (H, W) elevations, row 0 north; NaN marks no-data.
    dx: east-west cell size in the elevation unit (scalar or (H, 1) per row); dy: north-south.
    Returns float32 (dz/dx east, dz/dy north), each (H, W), unitless rise over run; NaN where
    the DEM is NaN. Edges are replicated, so the output has the input's shape.
    """
    dem = np.asarray(dem)
    dxv, dyv = _cell_sizes(dem, dx, dy)
    st = _Strips(dem, dxv, dyv)
    p_out = np.empty(dem.shape, np.float32)
    q_out = np.empty(dem.shape, np.float32)
    for r0 in range(0, st.h, STRIP_ROWS):
        r1 = min(r0 + STRIP_ROWS, st.h)
        p, q = st.gradient(r0, r1)
        p_out[r0:r1] = p
        q_out[r0:r1] = q
    return p_out, q_out


def centre_gradient(stencils: np.ndarray, dx, dy) -> tuple[np.ndarray, np.ndarray]:
    """Horn (1981) gradient of the centres of 3 x 3 neighbourhoods only.

    stencils: float32 (h, 3, w, 3), element (i, a, j, b) the cell (a - 1, b - 1) away from
    centre (i, j) (neighbourhoods laid side by side: ``stencils.reshape(3 h, 3 w)``); NaN marks
    no-data. dx: east-west cell size of each centre's row (scalar, or (h,) / (h, 1)); dy:
    north-south. Returns float32 (dz/dx east, dz/dy north), each (h, w): exactly what
    :func:`horn_gradient` of the side-by-side array gives at its centres ``[1::3, 1::3]`` (each
    output cell depends only on its own 3 x 3 neighbourhood; the same float32 operations in the
    same order, cells next to NaN as :func:`_gradient_nan`), without the 8 of 9 cells that
    are not centres.
    """
    stencils = np.asarray(stencils)
    if stencils.ndim != 4 or stencils.shape[1] != 3 or stencils.shape[3] != 3:
        raise ValueError(f"stencils must be (h, 3, w, 3), got shape {stencils.shape}")
    h = stencils.shape[0]
    dxv, dyv = _cell_sizes(np.empty((h, 0), np.float32), dx, dy)

    def z(a: int, b: int) -> np.ndarray:
        return stencils[:, a + 1, :, b + 1]

    def weighted(a, b, c) -> np.ndarray:   # (a + c) + b + b: Horn's [1 2 1] sum as strips add
        out = np.add(a, c)
        out += b
        out += b
        return out

    p = weighted(z(-1, 1), z(0, 1), z(1, 1))
    p -= weighted(z(-1, -1), z(0, -1), z(1, -1))
    q = weighted(z(-1, -1), z(-1, 0), z(-1, 1))
    q -= weighted(z(1, -1), z(1, 0), z(1, 1))
    if not (np.isfinite(p.sum()) and np.isfinite(q.sum())):
        centre_nan = np.isnan(z(0, 0))
        bad = np.isnan(p)
        bad |= np.isnan(q)
        bad &= ~centre_nan
        i, j = np.nonzero(bad)
        p[i, j], q[i, j] = _reflected(lambda a, b: stencils[i, a + 1, j, b + 1])
        p[centre_nan] = np.nan
        q[centre_nan] = np.nan
    if isinstance(dxv, float):
        p *= 1.0 / (8.0 * dxv)
    else:
        p *= (1.0 / (8.0 * dxv)).astype(np.float32)
    q *= np.float32(1.0 / (8.0 * dyv))
    return p, q


def shade_gradient(p: np.ndarray, q: np.ndarray, azimuth: float = 315.0, altitude: float = 45.0,
                   exaggeration: float = 1.0, directions: int = 1) -> np.ndarray:
    """:func:`multidirectional`'s shade of cells given by their Horn gradients ``p``, ``q``
    (float32, one shape, as :func:`horn_gradient` or :func:`centre_gradient` gives them): the
    same float32 operations, so the same bits as shading the DEM. Float32 in [0, 1]; NaN where
    the gradient is NaN."""
    directions = int(directions)
    if directions < 1:
        raise ValueError(f"directions must be >= 1, got {directions}")
    if not 0.0 < altitude <= 90.0:
        raise ValueError(f"altitude must be in (0, 90] degrees, got {altitude}")
    light = _Light(azimuth, altitude, exaggeration, directions)
    p2, q2 = np.atleast_2d(p), np.atleast_2d(q)
    out = np.empty(p2.shape, np.float32)
    light.shade(p2, q2, light.buffers(*p2.shape), out)
    return out.reshape(np.shape(p))


def _azimuths(azimuth: float, directions: int) -> tuple[np.ndarray, np.ndarray]:
    """Evenly spaced azimuths ``azimuth + k * 360 / n`` and their weights (1 + cos(k 360/n)) / 2."""
    k = np.arange(directions)
    offset = np.radians(k * 360.0 / directions)
    az = np.radians(azimuth) + offset
    weights = np.ones(1) if directions == 1 else (1.0 + np.cos(offset)) / 2.0
    return az, weights


def multidirectional(dem: np.ndarray, dx, dy, azimuth: float = 315.0, altitude: float = 45.0,
                     exaggeration: float = 1.0, directions: int = 1) -> np.ndarray:
    """Lambertian shade under ``directions`` suns, combined as a weighted mean.

    The suns stand at ``azimuth + k * 360 / directions`` (k = 0..n-1), all at ``altitude``; the set
    is symmetric about ``azimuth``. Sun k has the fixed weight ``(1 + cos(k * 360 / n)) / 2``: the
    main sun counts fully, side suns less, the one opposite not at all (our own choice). The
    unclipped Lambertian terms of such a mean add up to one sun at ``azimuth`` with half the
    oblique contrast; what the extra suns change is the terminator: faces turned away from the main
    sun are lit by the side suns instead of going black. ``directions = 1`` is plain
    :func:`hillshade`. Flat ground still shades to ``sin(altitude)``.

    Returns float32 (H, W) in [0, 1]; NaN where the DEM is NaN.
    """
    directions = int(directions)
    if directions < 1:
        raise ValueError(f"directions must be >= 1, got {directions}")
    if not 0.0 < altitude <= 90.0:
        raise ValueError(f"altitude must be in (0, 90] degrees, got {altitude}")
    dem = np.asarray(dem)
    dxv, dyv = _cell_sizes(dem, dx, dy)
    light = _light(float(azimuth), float(altitude), float(exaggeration), directions)
    out = np.empty(dem.shape, np.float32)
    if _compiled_shade(dem, dxv, dyv, light, out):
        return out
    st = _Strips(dem, dxv, dyv)
    bufs = light.buffers(min(STRIP_ROWS, st.h), st.w)
    for r0 in range(0, st.h, STRIP_ROWS):
        r1 = min(r0 + STRIP_ROWS, st.h)
        p, q = st.gradient(r0, r1)
        light.shade(p, q, bufs, out[r0:r1])
    return out


def _compiled_shade(dem: np.ndarray, dx: np.ndarray | float, dy: float, light: _Light,
                    out: np.ndarray) -> bool:
    """:func:`multidirectional` into ``out`` by the compiled kernel (:mod:`compose.kernels`), the
    same float32 operations in the same order per pixel (cells next to no-data as
    :func:`_gradient_nan`), so the same bits; False when there is no kernel or the DEM is not
    float32: then the numpy strips below shade it."""
    kernel = compiled()
    if kernel is None or dem.dtype != np.float32 or not dem.size:
        return False
    # the factors the numpy path multiplies p and q by: a float scale is taken as float32
    # (numpy's rule for a Python float with a float32 array), per-row ones are cast
    if np.ndim(dx) == 0:
        scale_p = np.full(dem.shape[0], np.float32(1.0 / (8.0 * float(dx))), np.float32)
    else:
        scale_p = (1.0 / (8.0 * np.asarray(dx))).astype(np.float32).reshape(-1)
    cx, cy, weights = light.packed
    return bool(kernel.hillshade(np.ascontiguousarray(dem), scale_p,
                                 float(np.float32(1.0 / (8.0 * dy))), float(light.k2),
                                 float(light.sin_alt), cx, cy, weights, out))


@functools.lru_cache(maxsize=64)
def _light(azimuth: float, altitude: float, exaggeration: float, directions: int) -> _Light:
    """The :class:`_Light` of these suns, made once (a window walk shades every window under
    the same suns; the object is only read)."""
    return _Light(azimuth, altitude, exaggeration, directions)


class _Light:
    """The suns of :func:`multidirectional` and the shading of gradient rows under them."""

    def __init__(self, azimuth: float, altitude: float, exaggeration: float, directions: int):
        alt = math.radians(altitude)
        self.sin_alt, cos_alt = np.float32(math.sin(alt)), math.cos(alt)
        az, weights = _azimuths(azimuth, directions)
        keep = weights > 1e-12
        az, self.weights = az[keep], weights[keep] / weights[keep].sum()
        # n . s with n = (-p, -q, 1)/sqrt(1 + p^2 + q^2), s = (sin az cos alt, cos az cos alt, sin alt)
        self.cx = [np.float32(-exaggeration * cos_alt * math.sin(a)) for a in az]
        self.cy = [np.float32(-exaggeration * cos_alt * math.cos(a)) for a in az]
        self.k2 = np.float32(exaggeration * exaggeration)
        #: the suns' coefficients and weights as float32 arrays, for the compiled kernel
        self.packed = (np.array(self.cx, np.float32), np.array(self.cy, np.float32),
                       np.array([np.float32(w) for w in self.weights], np.float32))

    def buffers(self, rows: int, width: int) -> tuple:
        den, num, tmp = (np.empty((rows, width), np.float32) for _ in range(3))
        acc = np.empty((rows, width), np.float32) if len(self.cx) > 1 else None
        return den, num, tmp, acc

    def shade(self, p: np.ndarray, q: np.ndarray, bufs: tuple, dst: np.ndarray) -> None:
        """Shade of gradient rows ``p``, ``q`` (m rows) into ``dst`` (m rows), float32."""
        den, num, tmp, acc = bufs
        m = p.shape[0]
        d, u, t = den[:m], num[:m], tmp[:m]
        np.multiply(p, p, out=d)
        np.multiply(q, q, out=t)
        d += t
        d *= self.k2
        d += 1.0
        np.sqrt(d, out=d)
        for i in range(len(self.cx)):
            np.multiply(p, self.cx[i], out=u)
            u += self.sin_alt
            np.multiply(q, self.cy[i], out=t)
            u += t
            np.maximum(u, 0.0, out=u)
            if acc is None:
                continue
            if i == 0:
                np.multiply(u, np.float32(self.weights[0]), out=acc[:m])
            else:
                u *= np.float32(self.weights[i])
                acc[:m] += u
        res = u if acc is None else acc[:m]
        np.divide(res, d, out=dst)
        np.minimum(dst, 1.0, out=dst)   # n.s <= 1; guards rounding only


def hillshade(dem: np.ndarray, dx, dy, azimuth: float = 315.0, altitude: float = 45.0,
              exaggeration: float = 1.0) -> np.ndarray:
    """Lambertian hillshade (Horn 1981): ``max(0, cos Z cos S + sin Z sin S cos(az - aspect))``.

    Z = 90 - altitude is the sun's zenith angle, S the slope and aspect the downslope compass
    direction from :func:`horn_gradient`; ``exaggeration`` multiplies the elevations (so
    ``tan S``). Returns float32 (H, W) in [0, 1]: flat ground gives ``sin(altitude)``, a face
    square to the sun 1, faces turned away 0; NaN where the DEM is NaN.
    """
    return multidirectional(dem, dx, dy, azimuth, altitude, exaggeration, directions=1)


def flat_normalised(shade: np.ndarray, altitude: float) -> np.ndarray:
    """``shade / sin(altitude)`` clipped to [0, 1], float32.

    Flat ground becomes 1 (and so do faces tilted toward the sun), so a relief multiplied over a
    tint leaves flat ground at exactly the tint and only darkens slopes. NaN stays NaN.
    """
    if not 0.0 < altitude <= 90.0:
        raise ValueError(f"altitude must be in (0, 90] degrees, got {altitude}")
    out = np.multiply(shade, np.float32(1.0 / math.sin(math.radians(altitude))),
                      dtype=np.float32)
    return np.clip(out, 0.0, 1.0, out=out)


def shade_spread(samples, azimuth: float = 315.0, altitude: float = 45.0,
                 exaggeration: float = 1.0, directions: int = 1, q: float = 95.0) -> float:
    """The ``q`` th percentile of |shade - sin(altitude)| (0-1) over DEM ``samples``, a list of
    (dem, dx, dy) as for :func:`multidirectional`: how far the terrain moves the shade from flat
    ground's. NaN when no sample has a valid cell."""
    return _spread([horn_gradient(np.asarray(dem), dx, dy) for dem, dx, dy in samples],
                   azimuth, altitude, exaggeration, directions, q)


def _spread(gradients, azimuth: float, altitude: float, exaggeration: float, directions: int,
            q: float = 95.0) -> float:
    """:func:`shade_spread` of samples given by their Horn gradients (p, q): the shade depends
    on the exaggeration only through the suns' coefficients, so the gradients are computed once
    for every factor tried (the same float32 arithmetic as :func:`multidirectional`)."""
    flat = math.sin(math.radians(altitude))
    light = _Light(azimuth, altitude, exaggeration, int(directions))
    devs = []
    for p, g in gradients:
        s = np.empty(p.shape, np.float32)
        light.shade(p, g, light.buffers(*p.shape), s)
        d = np.abs(s[np.isfinite(s)] - np.float32(flat))
        if d.size:
            devs.append(d)
    if not devs:
        return float("nan")
    return _percentile(np.concatenate(devs), q)


def _percentile(values: np.ndarray, q: float) -> float:
    """``float(np.percentile(values, q))`` (its default "linear" method: Hyndman and Fan's
    definition 7) of a 1-D array without NaN, ``q`` in [0, 100]: the same bits, from the two
    order statistics around rank (n - 1) q / 100 (np.partition), interpolated as numpy does.
    np.percentile also imports numpy's masked-array module (about 6 ms; a draft check needs it
    nowhere else)."""
    n = values.size
    if n == 0:
        raise ValueError("percentile of no values")
    rank = (n - 1) * (q / 100)
    lo = math.floor(rank)
    if rank >= n - 1:                   # numpy takes the largest value
        lo = hi = n - 1
        t = float(rank + 1)
    else:
        hi = lo + 1
        t = float(rank - lo)
    part = np.partition(values, (lo, hi)) if hi > lo else np.partition(values, lo)
    a, b = part[lo], part[hi]
    diff = b - a
    # numpy's _lerp: a + diff t, or b - diff (1 - t) where t >= 0.5, in the values' type
    return float(b - diff * (1 - t) if t >= 0.5 else a + diff * t)


def stretch_factor(samples, azimuth: float = 315.0, altitude: float = 45.0, directions: int = 1,
                   target: float = STRETCH_TARGET, limit: float = MAX_STRETCH,
                   gradients=None) -> float:
    """The vertical factor (>= 1) that normalises shading by the DEM's own slope distribution.

    It is the smallest factor at which :func:`shade_spread` (95th percentile of the illumination's
    distance from flat ground) reaches ``target``, found by bisection in log space, so gentle
    terrain -- or ordinary terrain at coarse cells -- shows like ordinary relief, while terrain
    that already reaches the target is left as Horn's shading draws it (factor 1). A DEM with no
    slope at all gets 1 (there is nothing to show, only noise to amplify); ``limit`` caps it.
    ``gradients``: the samples' Horn gradients, a list of (dz/dx, dz/dy) float32 arrays (2-D),
    when already known (then ``samples`` is not read; a draft's sampled cells, see
    :meth:`compose.layers.relief.ReliefLayer._sampled_stretch`).
    """
    if gradients is None:
        gradients = [horn_gradient(np.asarray(dem), dx, dy) for dem, dx, dy in samples]

    def spread(k: float) -> float:
        return _spread(gradients, azimuth, altitude, k, directions)

    at_one = spread(1.0)
    if not at_one < target:         # already visible (or nothing valid: NaN)
        return 1.0
    if not spread(limit) >= target:
        return limit if spread(limit) > 1e-3 else 1.0
    lo, hi = 0.0, math.log(limit)
    for _ in range(14):
        mid = (lo + hi) / 2
        if spread(math.exp(mid)) >= target:
            hi = mid
        else:
            lo = mid
    return float(math.exp(hi))
