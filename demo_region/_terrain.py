"""Shoreline, lagoon, landscape evolution and the final elevation grid of the invented region.

Dev script for the demo region, not part of compose. Grids are (rows, cols), row 0 at the north.
Coordinates inside this module are metres from the north-west corner: ``x`` east, ``y`` north
measured from the south edge.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import ndimage

from _noise import rng_for, smoothstep, spectral_noise

__all__ = ["Grid", "Shore", "make_shore", "Coarse", "evolve", "make_elevation", "upsample",
           "local_slope", "flow_receivers", "tree_depth", "accumulate", "flood_tree",
           "steady_heights", "hillslopes"]


@dataclass(frozen=True, slots=True)
class Grid:
    """A north-up grid: ``n`` x ``n`` square cells of ``cell`` metres."""

    n: int
    cell: float

    @property
    def size(self) -> float:
        return self.n * self.cell

    def centres(self) -> tuple[np.ndarray, np.ndarray]:
        """Cell-centre x (east) and y (north, from the south edge) in metres, each (n, n)."""
        c = (np.arange(self.n) + 0.5) * self.cell
        x = np.broadcast_to(c[None, :], (self.n, self.n))
        y = np.broadcast_to(self.size - c[:, None], (self.n, self.n))
        return x, y


@dataclass(frozen=True, slots=True)
class Shore:
    """Land/water layout on the fine grid: boolean masks and the spit's centre line."""

    land: np.ndarray          # bool, True on land (spit included)
    lagoon: np.ndarray        # bool, True in the lagoon and its inlet
    spit: np.ndarray          # bool, True on the barrier spit
    spit_line: np.ndarray     # (k, 2) x, y in metres, the spit's crest
    bay_centre: tuple[float, float]


def make_shore(grid: Grid, seed: int) -> Shore:
    """Coastline from a signed 'continentality' field, a bay closed by a barrier spit."""
    x, y = grid.centres()
    xk, yk = x / 1000.0, y / 1000.0
    km = grid.size / 1000.0
    # Main shore runs NNW-SSE: x = 9 km at the north edge, 23 km at the south edge.
    xc = 23.0 - 14.0 * yk / km
    shape = (grid.n, grid.n)
    n_large = spectral_noise(rng_for(seed, 1), shape, grid.cell, 4.0, 40000.0, 4000.0)
    n_mid = spectral_noise(rng_for(seed, 11), shape, grid.cell, 3.0, 5000.0, 600.0)
    n_small = spectral_noise(rng_for(seed, 12), shape, grid.cell, 2.5, 800.0, 90.0)
    yb = 27.0
    ux, uy = np.array([-14.0, km]) / np.hypot(14.0, km)       # along-shore unit vector
    bx, by = 23.0 - 14.0 * yb / km + 1.5 * uy, yb - 1.5 * ux   # 1.5 km inland of the shore line
    along = (xk - bx) * ux + (yk - by) * uy
    across = (xk - bx) * uy - (yk - by) * ux
    bump = np.exp(-((np.hypot(along / 4.6, across / 2.6)) ** 4))
    noise = 4.0 * n_large + 1.1 * n_mid + 0.12 * n_small
    cont = (xk - xc) * 0.95 + noise * (1.0 - 0.6 * bump) - 6.0 * bump
    land1 = cont > 0.0

    # Spit: a bowed crest line between the two headlands of the bay.
    ends = []
    for d in (-5.4, 5.4):
        row = int(round((grid.size - (by + d * uy) * 1000.0) / grid.cell))
        cols = np.nonzero(land1[row])[0]
        x0 = (bx - 7.0) * 1000.0 / grid.cell
        cols = cols[cols > x0]
        ends.append(((cols[0] + 0.5) * grid.cell + 250.0, (grid.n - row - 0.5) * grid.cell))
    (sx, sy), (nx_, ny_) = ends
    cx, cy = 0.5 * (sx + nx_) - 2000.0 * uy, 0.5 * (sy + ny_) + 2000.0 * ux
    t = np.linspace(0.0, 1.0, 400)[:, None]
    p0, p1, p2 = np.array([sx, sy]), np.array([cx, cy]), np.array([nx_, ny_])
    line = (1 - t) ** 2 * p0 + 2 * (1 - t) * t * p1 + t**2 * p2
    # Distance to the crest line and the crest parameter of the nearest crest point.
    seed_img = np.zeros((grid.n, grid.n), dtype=np.int32)
    cols = np.clip((line[:, 0] / grid.cell).astype(int), 0, grid.n - 1)
    rows = np.clip(((grid.size - line[:, 1]) / grid.cell).astype(int), 0, grid.n - 1)
    seed_img[rows, cols] = np.arange(1, len(line) + 1)
    dist, (ir, ic) = ndimage.distance_transform_edt(seed_img == 0, return_indices=True)
    dist *= grid.cell
    tpar = (seed_img[ir, ic] - 1) / (len(line) - 1.0)
    width = 110.0 + 70.0 * np.sin(np.pi * tpar) + 25.0 * np.sin(7.0 * tpar)
    spit = (dist < width) & (bump > 0.04) & ~land1
    water = ~(land1 | spit)
    labels, _ = ndimage.label(water)
    brow = int((grid.size - by * 1000.0) / grid.cell)
    bcol = int(bx * 1000.0 / grid.cell)
    lag_id = labels[brow, bcol]
    edge_ids = set(np.unique(np.concatenate([labels[0], labels[-1], labels[:, 0], labels[:, -1]])))
    if lag_id == 0 or lag_id in edge_ids:
        raise RuntimeError("demo region: the spit does not close the lagoon; change the seed")
    lagoon = labels == lag_id
    # Inlet: a gap in the spit at 70 % of the spit's own span (north part).
    ts = tpar[spit]
    ix, iy = line[int(round((ts.min() + 0.7 * (ts.max() - ts.min())) * (len(line) - 1)))]
    inlet = spit & (np.hypot(x - ix, y - iy) < 260.0)
    spit &= ~inlet
    lagoon |= inlet
    land = land1 | spit
    land = _clean(land, lagoon)
    spit &= land
    lagoon &= ~land
    return Shore(land, lagoon, spit, line, (bx * 1000.0, by * 1000.0))


def _clean(land: np.ndarray, keep_water: np.ndarray) -> np.ndarray:
    """Drop islets under 400 cells and ponds cut off from the sea (except the lagoon)."""
    lab, _ = ndimage.label(land)
    sizes = np.bincount(lab.ravel())
    small = sizes < 400
    small[0] = False
    land = land & ~small[lab]
    wl, _ = ndimage.label(~land)
    wsizes = np.bincount(wl.ravel())
    wsizes[0] = 0
    main = np.argmax(wsizes)
    keep = np.unique(wl[keep_water & ~land])
    ponds = (wl > 0) & (wl != main) & ~np.isin(wl, keep)
    return land | ponds


# --- landscape evolution on the coarse grid -------------------------------------------------

_OFFS = [(-1, -1), (-1, 0), (-1, 1), (0, -1), (0, 1), (1, -1), (1, 0), (1, 1)]


def flow_receivers(h: np.ndarray, fixed: np.ndarray, cell: float) -> tuple[np.ndarray, np.ndarray]:
    """Steepest-descent (D8) receiver of every cell, flattened index, and the distance to it (m).

    Cells in ``fixed`` (base level) and pits receive themselves. Grid edges are closed.
    """
    n0, n1 = h.shape
    hp = np.pad(h, 1, constant_values=np.inf)
    idx = np.arange(h.size).reshape(h.shape)
    best = np.zeros(h.shape)
    rec = idx.copy()
    dist = np.full(h.shape, cell)
    for dr, dc in _OFFS:
        d = cell * (np.sqrt(2.0) if dr and dc else 1.0)
        s = (h - hp[1 + dr:1 + dr + n0, 1 + dc:1 + dc + n1]) / d
        better = s > best
        best = np.where(better, s, best)
        rec = np.where(better, idx + dr * n1 + dc, rec)
        dist = np.where(better, d, dist)
    rec[fixed] = idx[fixed]
    return rec.ravel(), dist.ravel()


def tree_depth(rec: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Steps from each cell to its outlet, and the outlet's index, by pointer jumping."""
    depth = (rec != np.arange(rec.size)).astype(np.int64)
    p = rec.copy()
    while True:
        pp = p[p]
        if np.array_equal(pp, p):
            return depth, p
        depth = depth + depth[p]
        p = pp


def _levels(depth: np.ndarray) -> list[np.ndarray]:
    order = np.argsort(depth, kind="stable")
    bounds = np.concatenate([[0], np.cumsum(np.bincount(depth))])
    return [order[bounds[k]:bounds[k + 1]] for k in range(len(bounds) - 1)]


def accumulate(rec: np.ndarray, levels: list[np.ndarray], weight: np.ndarray) -> np.ndarray:
    """Sum of ``weight`` over each cell and everything upstream of it."""
    acc = weight.astype(float).copy()
    for lv in levels[:0:-1]:
        np.add.at(acc, rec[lv], acc[lv])
    return acc


def flood_tree(surface: np.ndarray, outlets: np.ndarray, cell: float) -> tuple[np.ndarray, np.ndarray]:
    """Drainage tree grown by priority flood (Barnes et al. 2014) from ``outlets`` over ``surface``.

    Each cell drains to the neighbour that reached it first, so the tree crosses depressions
    instead of ending in them. Returns the receiver (flattened index) and distance to it (m).
    Grid edges are closed. A heap over all cells: use it on coarse grids only.
    """
    import heapq

    n0, n1 = surface.shape
    rec = np.arange(surface.size)
    dist = np.full(surface.size, cell)
    done = outlets.copy()
    heap = [(surface.flat[i], int(i)) for i in np.flatnonzero(outlets)]
    heapq.heapify(heap)
    diag = cell * np.sqrt(2.0)
    while heap:
        z, i = heapq.heappop(heap)
        r, c = divmod(i, n1)
        for dr, dc in _OFFS:
            rr, cc = r + dr, c + dc
            if 0 <= rr < n0 and 0 <= cc < n1 and not done[rr, cc]:
                done[rr, cc] = True
                j = rr * n1 + cc
                rec[j] = i
                dist[j] = diag if dr and dc else cell
                heapq.heappush(heap, (max(surface[rr, cc], z), j))
    return rec, dist


def steady_heights(rec: np.ndarray, dist: np.ndarray, levels: list[np.ndarray], acc: np.ndarray,
                   ratio: np.ndarray, m_exp: float = 0.5, a_hill: float = 0.0) -> np.ndarray:
    """Steady state of detachment-limited stream power, U = K A^m S, along a drainage tree.

    Each cell sits ``ratio * A^-m * dist`` above its receiver, where ``ratio`` = U / K (m^(2m))
    and ``acc`` = A is the drained area (m^2). Below ``a_hill`` (m^2) the slope is held at its
    value for ``a_hill``, a stand-in for diffusive hillslopes above channel heads. Outlets are at
    0. Flattened float64.
    """
    h = np.zeros(rec.size)
    step = ratio.ravel() * np.maximum(acc, a_hill) ** (-m_exp) * dist
    for lv in levels[1:]:
        h[lv] = h[rec[lv]] + step[lv]
    return h


CHANNEL_AREA = 2.5e5     # m^2, drained area at which hillslopes give way to channels
HILL_SLOPE = 0.45        # model-metres per metre, mean hillslope gradient before rescaling
RATIO = 80.0             # U / K in m^(2m) where the uplift is full
FLOOR_AREA = 8.0e6       # m^2, rivers draining more than this get a flat floor
FLOOR_WIDTH = 40.0       # m, floor half-width per sqrt(km^2) of drained area (capped at 900 m)


def hillslopes(seeds: np.ndarray, slope: np.ndarray, cell: float) -> np.ndarray:
    """Lower envelope of slopes rising from seed cells: h(x) = min over paths (h_seed + int S ds).

    ``seeds`` holds heights at seed cells and +inf elsewhere; ``slope`` (m/m) is the gradient
    at each cell. Solved by repeated 8-neighbour relaxation until nothing changes (a
    Bellman-Ford form of the weighted distance transform). Float64, shape of ``seeds``.
    """
    h = seeds.copy()
    n0, n1 = h.shape
    for _ in range(4 * max(n0, n1)):
        hp = np.pad(h, 1, constant_values=np.inf)
        new = h.copy()
        for dr, dc in _OFFS:
            d = cell * (np.sqrt(2.0) if dr and dc else 1.0)
            np.minimum(new, hp[1 + dr:1 + dr + n0, 1 + dc:1 + dc + n1] + slope * d, out=new)
        if np.array_equal(new, h):
            break
        h = new
    return h


@dataclass(frozen=True, slots=True)
class Coarse:
    """Coarse-grid relief and its drainage network (flattened indices, row-major)."""

    height: np.ndarray        # float64 (n, n), model metres, 0 on water
    receiver: np.ndarray      # int64 (n*n,), D8 receiver; water cells receive themselves
    area: np.ndarray          # float64 (n*n,), drained area in m^2
    water: np.ndarray         # bool (n, n)
    cell: float


def evolve(water: np.ndarray, cell: float, seed: int, rounds: int = 20) -> Coarse:
    """Self-consistent steady-state stream-power relief on the coarse grid.

    The first drainage tree is grown by priority flood over a tilt plus large-scale noise (so a
    few large valleys are inherited); then ``rounds`` times: channel heights at stream-power
    steady state on the tree, new steepest-descent (D8) receivers on those heights, new
    drained areas. This follows the uplift/erosion steady-state approach of Cordonnier et al.
    2016 (Computer Graphics Forum 35(2)). Hillslopes then rise from the channels (drained area
    >= CHANNEL_AREA) and from flat floors along the larger rivers at a noisy gradient.
    """
    inland = ndimage.distance_transform_edt(~water) * cell
    plain_w = np.maximum(1800.0 + 1500.0 * spectral_noise(
        rng_for(seed, 6), water.shape, cell, 4.0, 40000.0, 8000.0), 600.0)
    ramp = smoothstep((inland - plain_w) / 8000.0)
    u_noise = spectral_noise(rng_for(seed, 3), water.shape, cell, 3.0, 40000.0, 3000.0)
    ratio = RATIO * (0.06 + 0.94 * ramp) * np.clip(1.0 + 0.35 * u_noise, 0.4, 1.6)
    big = spectral_noise(rng_for(seed, 4), water.shape, cell, 4.0, 45000.0, 5000.0)
    start = 0.03 * inland + (80.0 * big + rng_for(seed, 2).uniform(0.0, 40.0, water.shape)) * (
        smoothstep(inland / 8000.0))
    rec, dist = flood_tree(start, water, cell)
    area = np.full(water.size, cell * cell)
    for k in range(rounds):
        depth, _ = tree_depth(rec)
        levels = _levels(depth)
        acc = accumulate(rec, levels, area)
        h = steady_heights(rec, dist, levels, acc, ratio)
        if k == rounds - 1:
            break
        rec, dist = flow_receivers(h.reshape(water.shape), water, cell)
    h = h.reshape(water.shape)
    acc2 = acc.reshape(water.shape)
    seeds = np.where((acc2 >= CHANNEL_AREA) | water, h, np.inf)
    # Flat valley floors along rivers draining more than FLOOR_AREA, wider downstream.
    trunk = (acc2 >= FLOOR_AREA) & ~water
    dtr, (ir, ic) = ndimage.distance_transform_edt(~trunk, return_indices=True)
    half = np.minimum(FLOOR_WIDTH * np.sqrt(acc2[ir, ic] / 1e6), 900.0)
    floor = (dtr * cell <= half) & ~water
    seeds[floor] = np.minimum(seeds[floor], h[ir, ic][floor] + 0.004 * dtr[floor] * cell)
    s_noise = spectral_noise(rng_for(seed, 5), water.shape, cell, 3.0, 8000.0, 600.0)
    slope = HILL_SLOPE * np.clip(1.0 + 0.25 * s_noise, 0.5, 1.5) * (0.06 + 0.94 * ramp)
    height = hillslopes(seeds, slope, cell)
    return Coarse(height, rec, acc, water, cell)


PEAK = 1800.0            # m, the highest coarse summit after rescaling
SHELF_BREAK = 5500.0     # m offshore


def upsample(a: np.ndarray, factor: int, order: int = 3) -> np.ndarray:
    """Resample a coarse grid onto a grid ``factor`` times finer, cell centres aligned."""
    n = a.shape[0] * factor
    c = (np.arange(n) + 0.5) / factor - 0.5
    rr, cc = np.meshgrid(c, c, indexing="ij")
    return ndimage.map_coordinates(a, [rr, cc], order=order, mode="nearest")


def local_slope(z: np.ndarray, cell: float) -> np.ndarray:
    """Gradient magnitude (m/m) by central differences."""
    gy, gx = np.gradient(z, cell)
    return np.hypot(gx, gy)


def make_elevation(grid: Grid, shore: Shore, coarse: Coarse, seed: int) -> np.ndarray:
    """Elevation in metres on the fine grid: relief on land, a lagoon, shelf and slope offshore.

    Land is >= 0.3 m, water <= -0.5 m, so the 0 m contour is the shoreline. float64.
    """
    factor = int(round(coarse.cell / grid.cell))
    hc = ndimage.gaussian_filter(coarse.height, 0.8)
    hc[coarse.water] = 0.0
    hc *= PEAK / hc.max()
    up = np.maximum(upsample(hc, factor), 0.0)
    shape = (grid.n, grid.n)
    d_in = ndimage.distance_transform_edt(shore.land) * grid.cell
    detail = spectral_noise(rng_for(seed, 20), shape, grid.cell, 2.3, 1200.0, 60.0)
    land = up + (0.4 + 13.0 * local_slope(up, grid.cell)) * detail
    land = np.maximum(land, 0.0) + 0.3 + 1.5 * smoothstep(d_in / 400.0)
    # Barrier spit: a low dune ridge along its crest line.
    dune = spectral_noise(rng_for(seed, 21), shape, grid.cell, 2.0, 1500.0, 60.0)
    spit_z = 0.6 + 3.0 * smoothstep(d_in / 120.0) + 0.6 * dune
    land = np.where(shore.spit, np.maximum(spit_z, 0.3), land)
    # Lagoon: a shallow bowl.
    d_lag = ndimage.distance_transform_edt(shore.lagoon) * grid.cell
    lag_noise = spectral_noise(rng_for(seed, 22), shape, grid.cell, 3.0, 4000.0, 150.0)
    lagoon_z = -(0.6 + 3.2 * (1.0 - np.exp(-d_lag / 500.0))) + 0.4 * lag_noise
    # Sea: shelf down to the break, then the slope toward -400 m.
    d_off = ndimage.gaussian_filter(ndimage.distance_transform_edt(~shore.land) * grid.cell, 8.0)
    km = d_off / 1000.0
    sea_z = -(1.0 + 75.0 * (1.0 - np.exp(-km / 5.0))) - 300.0 * smoothstep(
        (d_off - SHELF_BREAK) / 7000.0)
    sea_noise = spectral_noise(rng_for(seed, 23), shape, grid.cell, 3.2, 20000.0, 200.0)
    sea_z = sea_z * (1.0 + 0.06 * np.tanh(sea_noise))
    z = np.where(shore.land, land, np.where(shore.lagoon, np.minimum(lagoon_z, -0.5),
                                            np.minimum(sea_z, -0.5)))
    return z
