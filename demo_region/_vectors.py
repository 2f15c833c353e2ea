"""Shoreline contour, land polygons, towns, roads and the province for the demo region.

Dev script for the demo region, not part of compose. Map coordinates are metres in the
region's UTM CRS; rasters are north-up with cell centres at west + (col + 0.5) * cell.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely
from rasterio import features
from rasterio.transform import Affine
from scipy import ndimage
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import dijkstra, minimum_spanning_tree
from shapely.geometry import LineString, MultiLineString, Polygon, box, shape
from shapely.ops import linemerge, polygonize, unary_union

from _names import invent_names
from _noise import chaikin, chaikin_closed, smooth_line

__all__ = ["contour_zero", "land_polygons", "Town", "place_towns", "route_roads", "province",
           "survey_frame"]


# --- shoreline ------------------------------------------------------------------------------

def contour_zero(z: np.ndarray, transform: Affine) -> list[LineString]:
    """The 0 contour of ``z`` (cell-centre values) by marching squares, clipped to the grid.

    Crossings are interpolated linearly on the edges between cell centres; saddles are resolved
    by the mean of the four corners. The grid is padded by one edge-replicated cell so lines
    run to the extent's edge. Lines in map coordinates.
    """
    zp = np.pad(z, 1, mode="edge").astype(float)
    up = zp >= 0.0
    n0, n1 = zp.shape
    # Crossing points on horizontal edges (r, c)-(r, c+1) and vertical edges (r, c)-(r+1, c),
    # in padded index space (row, col) of cell centres.
    with np.errstate(divide="ignore", invalid="ignore"):
        th = zp[:, :-1] / (zp[:, :-1] - zp[:, 1:])
        tv = zp[:-1, :] / (zp[:-1, :] - zp[1:, :])
    hx = np.arange(n1 - 1)[None, :] + np.nan_to_num(th)
    hy = np.broadcast_to(np.arange(n0)[:, None], th.shape).astype(float)
    vx = np.broadcast_to(np.arange(n1)[None, :], tv.shape).astype(float)
    vy = np.arange(n0 - 1)[:, None] + np.nan_to_num(tv)
    a, b, c, d = up[:-1, :-1], up[:-1, 1:], up[1:, 1:], up[1:, :-1]
    case = a * 1 + b * 2 + c * 4 + d * 8
    centre = (zp[:-1, :-1] + zp[:-1, 1:] + zp[1:, 1:] + zp[1:, :-1]) >= 0.0
    rr, cc = np.meshgrid(np.arange(n0 - 1), np.arange(n1 - 1), indexing="ij")

    def edge(name: str, m: np.ndarray) -> np.ndarray:
        r, k = rr[m], cc[m]
        if name == "T":
            return np.column_stack([hx[r, k], hy[r, k]])
        if name == "B":
            return np.column_stack([hx[r + 1, k], hy[r + 1, k]])
        if name == "L":
            return np.column_stack([vx[r, k], vy[r, k]])
        return np.column_stack([vx[r, k + 1], vy[r, k + 1]])   # "R"

    pairs = {1: ["TL"], 2: ["TR"], 3: ["LR"], 4: ["RB"], 6: ["TB"], 7: ["LB"], 8: ["LB"],
             9: ["TB"], 11: ["RB"], 12: ["LR"], 13: ["TR"], 14: ["TL"]}
    segs = []
    for k, pl in pairs.items():
        m = case == k
        for p in pl:
            segs.append(np.stack([edge(p[0], m), edge(p[1], m)], axis=1))
    for k, joined, split in ((5, ["TR", "LB"], ["TL", "RB"]), (10, ["TL", "RB"], ["TR", "LB"])):
        for use, cm in ((joined, centre), (split, ~centre)):
            m = (case == k) & cm
            for p in use:
                segs.append(np.stack([edge(p[0], m), edge(p[1], m)], axis=1))
    seg = np.concatenate(segs, axis=0)                         # (k, 2, 2) (col, row) padded
    cols, rows = seg[..., 0] - 1.0 + 0.5, seg[..., 1] - 1.0 + 0.5
    xs, ys = transform * (cols, rows)
    seg_xy = np.stack([xs, ys], axis=-1)
    merged = linemerge(MultiLineString([s for s in seg_xy]))
    lines = list(merged.geoms) if hasattr(merged, "geoms") else [merged]
    ext = box(*(transform * (0, z.shape[0])), *(transform * (z.shape[1], 0)))
    out: list[LineString] = []
    for ln in lines:
        cl = ln.intersection(ext)
        for part in getattr(cl, "geoms", [cl]):
            if isinstance(part, LineString) and part.length > 0:
                out.append(part)
    return out


def land_polygons(lines: list[LineString], z: np.ndarray, transform: Affine) -> shapely.Geometry:
    """Land as (Multi)Polygon: faces of shoreline + extent edge whose inside is >= 0 m."""
    ext = box(*(transform * (0, z.shape[0])), *(transform * (z.shape[1], 0)))
    faces = list(polygonize(unary_union(lines + [ext.boundary])))
    inv = ~transform
    keep = []
    for f in faces:
        p = f.representative_point()
        col, row = inv * (p.x, p.y)
        if z[int(row), int(col)] >= 0.0:
            keep.append(f)
    return unary_union(keep)


# --- towns ----------------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class Town:
    """A settlement: map position, invented name, population, kind, coarse cell (row, col)."""

    x: float
    y: float
    name: str
    population: int
    kind: str
    cell: tuple[int, int]


def place_towns(elev_c: np.ndarray, slope_c: np.ndarray, dry_c: np.ndarray, river_d: np.ndarray,
                coast_d: np.ndarray, mouth_d: np.ndarray, west: float, north: float,
                cell: float, rng: np.random.Generator, taken: set[str], count: int = 20,
                inland: int = 7) -> list[Town]:
    """Greedy placement on the coarse grid: flat, low, dry cells near rivers and the coast.

    Inputs are coarse (n, n): mean elevation (m), slope (m/m), True where the cell and its
    neighbours are all land, distances (m) to the nearest river, shoreline and river mouth.
    ``count - inland`` sites are picked anywhere, then ``inland`` more at least 8 km from the
    shore (valley towns). The two best are cities, the next five and the two best inland
    sites towns, the rest villages; no two places closer than 2.6 km (cities 7 km apart);
    none within 1.5 km of the extent's edge.
    """
    score = (np.exp(-elev_c / 700.0) * np.exp(-slope_c / 0.06)
             * (0.25 + 0.75 * np.exp(-river_d / 400.0))
             * (0.75 + 0.25 * np.exp(-coast_d / 3000.0))
             * (1.0 + 1.2 * np.exp(-mouth_d / 1500.0)))
    score *= rng.uniform(0.7, 1.0, score.shape)
    score[~dry_c] = 0.0
    score[coast_d < 250.0] = 0.0
    edge = int(round(1500.0 / cell))
    score[:edge], score[-edge:], score[:, :edge], score[:, -edge:] = 0.0, 0.0, 0.0, 0.0
    n1 = score.shape[1]
    chosen: list[tuple[int, int]] = []

    def pick(sc: np.ndarray, total: int) -> None:
        for flat in np.argsort(-sc, axis=None, kind="stable"):
            if len(chosen) == total or sc.flat[flat] <= 0:
                return
            r, c = divmod(int(flat), n1)
            gaps = [np.hypot(r - rr_, c - cc_) * cell for rr_, cc_ in chosen]
            if all(g >= (7000.0 if len(chosen) < 2 and k < 2 else 2600.0)
                   for k, g in enumerate(gaps)):
                chosen.append((r, c))

    pick(score, count - inland)
    pick(np.where(coast_d > 8000.0, score, 0.0), count)
    kinds = (["city"] * 2 + ["town"] * 5 + ["village"] * (count - inland - 7)
             + ["town"] * 2 + ["village"] * (inland - 2))
    names = invent_names(rng, len(chosen), taken)
    towns = []
    for k, (r, c) in enumerate(chosen):
        kind = kinds[k]
        if kind == "city":
            pop = int(rng.integers(60_000, 180_000))
        elif kind == "town":
            pop = int(rng.integers(5_000, 30_000))
        else:
            pop = int(rng.integers(250, 2_500))
        jx, jy = rng.uniform(-20.0, 20.0, 2)
        towns.append(Town(west + (c + 0.5) * cell + jx, north - (r + 0.5) * cell + jy,
                          names[k], pop, kind, (r, c)))
    towns.sort(key=lambda t: -t.population)
    return towns


# --- roads ----------------------------------------------------------------------------------

_OFFS = [(-1, -1), (-1, 0), (-1, 1), (0, -1), (0, 1), (1, -1), (1, 0), (1, 1)]


def _graph(cost: np.ndarray, passable: np.ndarray, cell: float):
    n0, n1 = cost.shape
    idx = np.arange(cost.size).reshape(cost.shape)
    rows, cols, w = [], [], []
    for dr, dc in _OFFS:
        r0, r1 = max(0, -dr), n0 - max(0, dr)
        c0, c1 = max(0, -dc), n1 - max(0, dc)
        a = idx[r0:r1, c0:c1]
        b = idx[r0 + dr:r1 + dr, c0 + dc:c1 + dc]
        ok = passable[r0:r1, c0:c1] & passable[r0 + dr:r1 + dr, c0 + dc:c1 + dc]
        d = cell * (np.sqrt(2.0) if dr and dc else 1.0)
        ww = 0.5 * (cost[r0:r1, c0:c1] + cost[r0 + dr:r1 + dr, c0 + dc:c1 + dc]) * d
        rows.append(a[ok])
        cols.append(b[ok])
        w.append(ww[ok])
    return coo_matrix((np.concatenate(w), (np.concatenate(rows), np.concatenate(cols))),
                      shape=(cost.size, cost.size)).tocsr()


def _path(pred: np.ndarray, target: int) -> list[int]:
    out = [target]
    while pred[out[-1]] >= 0:
        out.append(int(pred[out[-1]]))
    return out[::-1]


def route_roads(towns: list[Town], slope_c: np.ndarray, passable: np.ndarray, river_c: np.ndarray,
                noise: np.ndarray, west: float, north: float, cell: float
                ) -> list[tuple[LineString, str]]:
    """Least-cost roads on the coarse grid: a main network joining cities and towns (minimum
    spanning tree of least-cost distances, plus the two cheapest extra links), then minor roads
    from each village to the nearest road. Cost grows with the square of slope; crossing a
    river costs extra; smooth ``noise`` (unit std) varies it by a factor exp(0.6 noise), so roads wander;
    water is impassable; later roads reuse earlier ones (cheaper)."""
    n1 = slope_c.shape[1]
    cost = (1.0 + (slope_c / 0.07) ** 2 + 6.0 * river_c) * np.exp(0.6 * noise)
    used = np.zeros(slope_c.shape, dtype=np.uint8)        # 0 none, 1 minor, 2 main
    edges: dict[tuple[int, int], int] = {}
    hubs = [t for t in towns if t.kind != "village"]
    hub_idx = [t.cell[0] * n1 + t.cell[1] for t in hubs]
    g = _graph(cost, passable, cell)
    dmat = dijkstra(g, indices=hub_idx)[:, hub_idx]
    mst = minimum_spanning_tree(dmat).toarray()
    mst = mst + mst.T
    links = [(int(i), int(j)) for _, i, j in sorted(
        (dmat[i, j], i, j) for i, j in zip(*np.nonzero(np.triu(mst))))]
    extra = sorted((dmat[i, j] / max(np.hypot(hubs[i].x - hubs[j].x, hubs[i].y - hubs[j].y), 1.0),
                    i, j) for i in range(len(hubs)) for j in range(i + 1, len(hubs))
                   if mst[i, j] == 0 and mst[j, i] == 0)
    links += [(i, j) for _, i, j in extra[:2]]

    def add(path: list[int], level: int) -> None:
        for a, b in zip(path[:-1], path[1:]):
            key = (min(a, b), max(a, b))
            edges[key] = max(edges.get(key, 0), level)
        r, c = np.divmod(np.asarray(path), n1)
        used[r, c] = np.maximum(used[r, c], level)

    for i, j in links:
        g = _graph(cost * np.where(used > 0, 0.35, 1.0), passable, cell)
        _, pred = dijkstra(g, indices=hub_idx[i], return_predecessors=True)
        add(_path(pred, hub_idx[j]), 2)
    for t in towns:
        if t.kind != "village":
            continue
        g = _graph(cost * np.where(used > 0, 0.35, 1.0), passable, cell)
        target = t.cell[0] * n1 + t.cell[1]
        if used.flat[target]:
            continue
        dist, pred = dijkstra(g, indices=target, return_predecessors=True)
        reach = np.flatnonzero(used.ravel() > 0)
        dd = dist[reach]
        if not np.isfinite(dd).any():
            continue
        src = int(reach[np.argmin(dd)])
        add(_path(pred, src)[::-1], 1)

    def xy(i: int) -> tuple[float, float]:
        r, c = divmod(i, n1)
        return west + (c + 0.5) * cell, north - (r + 0.5) * cell

    out: list[tuple[LineString, str]] = []
    for level, cls in ((2, "main"), (1, "minor")):
        segs = [LineString([xy(a), xy(b)]) for (a, b), lv in sorted(edges.items()) if lv == level]
        if not segs:
            continue
        merged = linemerge(MultiLineString(segs))
        for ln in getattr(merged, "geoms", [merged]):
            sm = LineString(chaikin(smooth_line(np.asarray(ln.coords), 5), 3)).simplify(4.0)
            out.append((sm, cls))
    return out


# --- province -------------------------------------------------------------------------------

def province(labels: np.ndarray, keep: np.ndarray, land: shapely.Geometry, transform: Affine,
             clip: Polygon) -> Polygon:
    """Union of the basins whose labels are in ``keep`` on the coarse grid (water, label < 0,
    included), smoothed, clipped to land and to ``clip``; the largest part is returned."""
    mask = np.isin(labels, keep) | (labels < 0)       # the water too, so the coast is exact
    mask = ndimage.binary_opening(mask, iterations=1)
    polys = [shape(g) for g, v in features.shapes(mask.astype(np.uint8), mask=mask,
                                                  transform=transform) if v == 1]
    merged = unary_union(polys).buffer(0)
    parts = sorted(getattr(merged, "geoms", [merged]), key=lambda p: -p.area)
    ring = np.asarray(parts[0].exterior.simplify(90.0).coords)[:-1]
    poly = Polygon(chaikin_closed(ring, 3)).buffer(0)
    out = poly.intersection(land).intersection(clip)
    parts = sorted(getattr(out, "geoms", [out]), key=lambda p: -p.area)
    return parts[0]


def survey_frame(west: float, south: float, east: float, north: float,
                 rng: np.random.Generator) -> Polygon:
    """A clip polygon whose east and north sides are straight-segment 'surveyed' lines 1.5-4.5 km
    inside the extent (six vertices each); its west and south sides lie outside the extent."""
    k = 6
    ys = np.linspace(south - 1000.0, north, k)
    xs = np.linspace(east, west - 1000.0, k)
    de = rng.uniform(1500.0, 4500.0, k)
    dn = rng.uniform(1500.0, 4500.0, k)
    east_side = [(east - d, y) for d, y in zip(de, ys)]
    north_side = [(x, north - d) for d, x in zip(dn, xs)]
    corner = (min(east_side[-1][0], north_side[0][0]), min(east_side[-1][1], north_side[0][1]))
    ring = [(west - 1000.0, south - 1000.0)] + east_side[:-1] + [corner] + north_side[1:]
    return Polygon(ring).buffer(0)
