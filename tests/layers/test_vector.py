"""Vector layers: a draft check's lines and outlines are simplified within a few draft pixels
(GEOS: repeated points within a pixel dropped, then Douglas-Peucker; areas: Douglas-Peucker
keeping their topology); the full render's are drawn as read."""
from __future__ import annotations

import numpy as np
import shapely

from compose.layers.vector import DRAFT_TOLERANCE, _simplified
from compose.sources.vector import Features


def test_draft_simplification_stays_within_its_tolerance():
    rng = np.random.default_rng(3)
    walk = np.cumsum(rng.normal(0, 1.0, (400, 2)), axis=0)          # a wiggly line, 1 m steps
    ring = shapely.Point(0, 0).buffer(500, quad_segs=64)              # a round polygon
    feats = Features.build([shapely.LineString(walk), ring, shapely.Point(3, 4)],
                           [{"i": 0}, {"i": 1}, {"i": 2}])
    tol = 22.0 * DRAFT_TOLERANCE                   # a draft pixel of 22 m
    out = _simplified(feats, tol)
    line, area, point = out.geometries
    assert shapely.get_num_coordinates(line) < 400 / 4
    # vertices within the tolerance of the last kept dropped (the last kept one may give way
    # to the line's end: 2 tolerances), then Douglas-Peucker (1 more): 3 at most
    assert shapely.hausdorff_distance(line, feats.geometries[0]) <= 3 * tol + 1e-9
    assert line.coords[0] == tuple(walk[0]) and line.coords[-1] == tuple(walk[-1])
    assert area.is_valid and shapely.hausdorff_distance(area, ring) <= tol + 1e-9
    assert shapely.get_num_coordinates(area) < shapely.get_num_coordinates(ring) / 4
    assert point.equals(feats.geometries[2])
    assert [p["i"] for p in out.properties] == [0, 1, 2]
