"""A draft's lines thinned by the compiled loop (compose/_kernels.c: thin_lines, called by
compose.sources.vector._thin_rows) are the ones GEOS gives, bit for bit.

The reference is GEOS through shapely (an implementation outside the project):
``remove_repeated_points`` within the tolerance, then ``simplify`` without topology
(Douglas-Peucker), line by line, as compose.sources.vector._thinned does. The C source is built
here (tests/test_kernels.py's ``compiled`` fixture).
"""
from __future__ import annotations

import numpy as np
import pytest
import shapely

from compose import kernels
from compose.sources.vector import _thin_rows
from tests.test_kernels import compiled  # noqa: F401  (the fixture: the C source built here)


@pytest.fixture
def use(compiled, monkeypatch):  # noqa: F811
    """use(True): the compiled loop; use(False): shapely's."""
    monkeypatch.setattr(kernels, "_loaded", [compiled])

    def switch(on: bool) -> None:
        monkeypatch.setattr(kernels, "enabled", on)
    return switch


def _geos(xy: np.ndarray, counts: np.ndarray, tolerance: float) -> tuple[np.ndarray, np.ndarray]:
    """(vertices, counts per row) as GEOS thins each non-empty row (the reference)."""
    full = counts > 0
    starts = np.concatenate([[0], np.cumsum(counts[full])])
    lines = shapely.from_ragged_array(shapely.GeometryType.LINESTRING, xy, (starts,))
    lines = shapely.simplify(shapely.remove_repeated_points(lines, tolerance), tolerance,
                             preserve_topology=False)
    out, index = shapely.get_coordinates(lines, return_index=True)
    thinned = np.zeros_like(counts)
    thinned[full] = np.bincount(index, minlength=int(full.sum()))
    return out, thinned


def _rows(rng, kind: int) -> tuple[np.ndarray, np.ndarray]:
    """Rows of lines of one of five kinds (empty rows, 2 and 3 vertex lines among them)."""
    rows = int(rng.integers(1, 30))
    counts = rng.integers(2, 40, rows)
    for share, value in ((0.1, 0), (0.1, 2), (0.1, 3)):
        counts[rng.random(rows) < share] = value
    n = int(counts.sum())
    if kind == 0:                   # scattered
        xy = rng.normal(size=(n, 2)) * rng.uniform(0.1, 10)
    elif kind == 1:                 # a walk on a grid: repeated vertices, equal distances
        xy = np.cumsum(rng.integers(-2, 3, (n, 2)), axis=0).astype(float)
    elif kind == 2:                 # dense walks far from the origin (the 8192 benchmark's)
        xy = np.cumsum(rng.normal(size=(n, 2)) * 0.45, axis=0) + 4.0e5
    elif kind == 3:                 # half-unit steps, some lines closed
        xy = np.round(rng.normal(size=(n, 2)) * 2) / 2
        starts = np.concatenate([[0], np.cumsum(counts)])
        for i in range(rows):
            if counts[i] >= 3 and rng.random() < 0.5:
                xy[starts[i + 1] - 1] = xy[starts[i]]
    else:                           # collinear runs, back and forth
        t = rng.integers(0, 5, n).astype(float)
        xy = np.stack([t, 2 * t + rng.integers(0, 2, n)], axis=1)
    return xy, counts


def _same(got, want) -> None:
    assert np.array_equal(got[1], want[1])
    assert got[0].shape == want[0].shape
    assert np.array_equal(got[0].view(np.uint64), want[0].view(np.uint64))   # bit for bit


@pytest.mark.parametrize("kind", range(5))
def test_compiled_thinning_equals_geos_bit_for_bit(use, kind):
    rng = np.random.default_rng(kind)
    use(True)
    for _ in range(300):
        xy, counts = _rows(rng, kind)
        tolerance = float(rng.choice([0.0, 0.5, 1.0, 2.0, rng.uniform(0.0, 3.0)]))
        _same(_thin_rows(xy, counts, tolerance), _geos(xy, counts, tolerance))


def test_the_compiled_loop_runs_and_the_switch_gives_shapelys(use, compiled):  # noqa: F811
    rng = np.random.default_rng(7)
    xy, counts = _rows(rng, 2)
    out, thinned = np.empty_like(xy), np.empty(len(counts), np.int64)
    written = compiled.thin_lines(xy, counts.astype(np.int64), 1.0, out, thinned)
    want = _geos(xy, counts, 1.0)
    _same((out[:written], thinned), want)
    assert written < len(xy)                # something was thinned
    use(False)
    _same(_thin_rows(xy, counts, 1.0), want)


def test_rows_the_loop_declines_are_thinned_by_shapely(use, compiled):  # noqa: F811
    """A coordinate that is not finite (GEOS drops it) or a 1-vertex row: None from the loop,
    nothing written; the rows are thinned as GEOS thins them."""
    use(True)
    xy = np.array([[0.0, 0.0], [0.1, 0.0], [np.nan, 1.0], [5.0, 5.0], [6.0, 5.0], [9.0, 9.0]])
    counts = np.array([4, 2], np.int64)
    out = np.full_like(xy, -1.0)
    assert compiled.thin_lines(xy, counts, 0.5, out, np.zeros(2, np.int64)) is None
    assert (out == -1.0).all()
    _same(_thin_rows(xy, counts, 0.5), _geos(xy, counts, 0.5))
    one = np.array([[0.0, 0.0], [1.0, 0.0], [2.0, 0.0]])
    assert compiled.thin_lines(one, np.array([1, 2], np.int64), 0.5, np.empty_like(one),
                               np.zeros(2, np.int64)) is None
    with pytest.raises(ValueError):         # counts that do not add up to the vertices
        compiled.thin_lines(one, np.array([2, 2], np.int64), 0.5, np.empty_like(one),
                            np.zeros(2, np.int64))
