"""Rivers (Strahler order, names) and drainage basins from the coarse drainage network.

Dev script for the demo region, not part of compose.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from _names import invent_names
from _noise import chaikin, smooth_line
from _terrain import Coarse, tree_depth

__all__ = ["River", "trace_rivers", "basins"]

RIVER_AREA = 4.0e6        # m^2, drained area at which a river is drawn
NAMED_LENGTH = 5000.0     # m, streams at least this long get a name


@dataclass(frozen=True, slots=True)
class River:
    """One river reach between confluences: map coordinates (k, 2), Strahler order, name."""

    xy: np.ndarray
    order: int
    name: str
    mouth: bool               # True when the reach ends in the sea or the lagoon
    area_km2: float           # drained area at its downstream end


def trace_rivers(co: Coarse, west: float, north: float, water_at, warp, rng: np.random.Generator,
                 taken: set[str]) -> list[River]:
    """Reaches of every river draining >= RIVER_AREA, smoothed, warped, cut at the shoreline.

    ``water_at(xy) -> bool array`` tells whether map points lie on fine-grid water;
    ``warp(xy) -> xy`` is a smooth displacement of map points (meanders on flat floors; being a
    function of position only, it keeps confluences joined).
    Strahler order: 1 at sources, +1 where two reaches of equal order meet.
    """
    n1 = co.height.shape[1]
    rec, acc = co.receiver, co.area
    water = co.water.ravel()
    chan = (acc >= RIVER_AREA) & ~water
    idx = np.flatnonzero(chan)
    donors: dict[int, list[int]] = {int(i): [] for i in idx}
    for i in idx:
        r = int(rec[i])
        if r in donors:
            donors[r].append(int(i))
    depth, _ = tree_depth(rec)
    upstream_first = idx[np.argsort(-depth[idx], kind="stable")]
    order: dict[int, int] = {}
    for i in upstream_first:
        i = int(i)
        ds = [order[d] for d in donors[i]]
        if not ds:
            order[i] = 1
        else:
            top = max(ds)
            order[i] = top + 1 if ds.count(top) >= 2 else top
    # Streams: from each mouth upstream, the donor draining most continues the stream.
    stream: dict[int, int] = {}
    next_id = 0
    for i in upstream_first[::-1]:
        i = int(i)
        if i not in stream:
            stream[i] = next_id
            next_id += 1
        ds = sorted(donors[i], key=lambda d: (-acc[d], d))
        for k, d in enumerate(ds):
            if k == 0:
                stream[d] = stream[i]
            else:
                stream[d] = next_id
                next_id += 1
    cell = co.cell

    def xy_of(cells: list[int]) -> np.ndarray:
        r, c = np.divmod(np.asarray(cells), n1)
        return np.column_stack([west + (c + 0.5) * cell, north - (r + 0.5) * cell])

    reaches: list[tuple[list[int], bool]] = []
    starts = [int(i) for i in upstream_first if len(donors[int(i)]) != 1]
    for s in starts:
        path = [s]
        cur = s
        while True:
            nxt = int(rec[cur])
            path.append(nxt)
            if water[nxt] or nxt == cur:
                reaches.append((path, True))
                break
            if len(donors[nxt]) >= 2:
                reaches.append((path, False))
                break
            cur = nxt
    lengths: dict[int, float] = {}
    for path, _m in reaches:
        seg = np.diff(xy_of(path), axis=0)
        lengths[stream[path[0]]] = lengths.get(stream[path[0]], 0.0) + float(
            np.hypot(seg[:, 0], seg[:, 1]).sum())
    ranked = sorted((sid for sid, ln in lengths.items() if ln >= NAMED_LENGTH),
                    key=lambda sid: -lengths[sid])
    names = dict(zip(ranked, invent_names(rng, len(ranked), taken)))
    out: list[River] = []
    for path, mouth in reaches:
        xy = warp(chaikin(smooth_line(xy_of(path), 5), 3))
        if mouth:
            xy = _to_shore(xy, water_at)
        if len(xy) < 2:
            continue
        last_land = path[-2] if mouth else path[-1]
        out.append(River(xy, order[path[0]], names.get(stream[path[0]], ""), mouth,
                         float(acc[last_land]) / 1e6))
    return out


def _to_shore(xy: np.ndarray, water_at) -> np.ndarray:
    """Cut a mouth reach at its first point on water, or extend its last segment (up to 300 m)
    until it reaches water, so every river ends just past the shoreline."""
    wet = water_at(xy)
    wet[0] = False
    if wet.any():
        return xy[: int(np.argmax(wet)) + 1]
    step = xy[-1] - xy[-2]
    step = step / max(float(np.hypot(*step)), 1e-9)
    probe = xy[-1] + step * np.arange(10.0, 301.0, 10.0)[:, None]
    hit = water_at(probe)
    return np.vstack([xy, probe[int(np.argmax(hit))]]) if hit.any() else xy


def basins(co: Coarse) -> np.ndarray:
    """Outlet index of every coarse cell (its basin label), int64 (n, n); water is -1."""
    _, root = tree_depth(co.receiver)
    lab = root.reshape(co.height.shape).copy()
    lab[co.water] = -1
    return lab
