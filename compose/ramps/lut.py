"""Lookup tables: a ramp sampled to 8-bit colours, and data values -> uint16 indices into it.

Index layout (n = number of ramp entries, ``len(lut.values)``)::

    0 .. n-1   ramp entries (continuous samples, classes of a stepped ramp, or qualitative classes)
    n          outside low   (finite values below the domain)
    n + 1      outside high  (finite values above the domain)
    n + 2      nodata        (NaN; for qualitative ramps also every value that is no class)

so a uint16 index image covers everything and ``np.take(lut.rgba8_table(), index)`` draws it.
Entries cover half-open intervals [edge_i, edge_i+1) and the last one is closed.

* continuous ramps: n samples at ``linspace(lo, hi, n)``; a value takes the nearest sample
  (edges halfway between samples). Threshold ramps: the break ``at`` is an edge -- samples at the
  centres of evenly spaced intervals on each side, so no entry straddles the hue change.
* stepped ramps: one entry per class interval; class colours per
  :data:`compose.ramps.model.STEPPED_COLOR_RULE`; ``values`` are the interval midpoints.
* qualitative ramps: one entry per class, in the order given; ``values`` are the class values;
  outside low and high are drawn in the nodata colour.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from compose.color.lab import srgb_to_lab
from compose.color.parse import to_rgb8
from compose.errors import ComposeError

#: A built :class:`compose.ramps.model.Ramp` (not imported here: the model draws its tables
#: through this module, so the dependency points one way).
Ramp = Any

__all__ = ["Lut", "lut_for", "stepped_lut", "quantile_breaks", "drawn_samples", "INDEX_CHUNK"]

#: Values indexed at a time by :meth:`Lut.index` (float64 temporaries of 128 kB stay in cache).
INDEX_CHUNK = 1 << 14


@dataclass(frozen=True, slots=True, eq=False)
class Lut:
    """A ramp as drawn. ``values`` (n,) data value of each entry; ``rgb8`` (n + 3, 3) uint8 and
    ``lab`` (n + 3, 3) CIELAB of those 8-bit colours, with outside low, outside high, nodata at n, n+1, n+2;
    ``edges`` (n + 1,) interval edges (empty for qualitative ramps); ``origin`` / ``width``
    describe evenly spaced intervals (index = floor((v - origin) / width)), used when ``width``
    is not None; ``split`` is the threshold break (a second even run starts there);
    ``quantile_pending``: quantile steps drawn as equal steps until :meth:`with_quantile_breaks`."""

    name: str
    kind: str
    values: np.ndarray
    rgb8: np.ndarray
    lab: np.ndarray
    edges: np.ndarray
    stepped: bool = False
    step_method: str | None = None
    origin: float | None = None
    width: float | None = None
    split: tuple[float, int, float] | None = None   # (at, first index above, width above)
    quantile_pending: bool = False   # quantile steps drawn as equal steps until given data
    ramp: Ramp | None = field(default=None, repr=False)

    @property
    def n(self) -> int:
        """Number of ramp entries (without outside low / high and nodata)."""
        return len(self.values)

    @property
    def outside_low_index(self) -> int:
        return self.n

    @property
    def outside_high_index(self) -> int:
        return self.n + 1

    @property
    def nodata_index(self) -> int:
        return self.n + 2

    def index(self, values) -> np.ndarray:
        """uint16 indices (same shape as ``values``): see the module docstring for the layout."""
        v = np.asarray(values)
        n = self.n
        if self.kind == "qualitative":
            v = v.astype(float, copy=False)
            order = np.argsort(self.values, kind="stable")
            sorted_v = self.values[order]
            pos = np.clip(np.searchsorted(sorted_v, v), 0, n - 1)
            idx = np.where(sorted_v[pos] == v, order[pos], self.nodata_index)
            return idx.astype(np.uint16)
        if v.ndim == 0:
            return self.index(v.reshape(1)).reshape(())
        # in runs of INDEX_CHUNK values, each converted to float64 as it is needed: the steps'
        # temporaries stay in cache (a window's index is the hot path of raster layers)
        flat = v.reshape(-1)
        out = np.empty(flat.shape, np.uint16)
        for s in range(0, flat.size, INDEX_CHUNK):
            out[s:s + INDEX_CHUNK] = self._index_run(flat[s:s + INDEX_CHUNK].astype(float))
        return out.reshape(v.shape)

    def _index_run(self, v: np.ndarray) -> np.ndarray:
        """:meth:`index` of float64 values (n,) of a continuous or stepped table."""
        n = self.n
        lo, hi = float(self.edges[0]), float(self.edges[-1])
        if self.width is not None:
            t = np.subtract(v, self.origin)
            t /= self.width
            np.floor(t, out=t)
            if self.split is not None:
                at, first, width2 = self.split
                t = np.where(v >= at, first + np.floor((v - at) / width2), np.minimum(t, first - 1))
        else:
            t = np.searchsorted(self.edges[1:-1], v, side="right").astype(float)
        nan = np.isnan(v)
        np.clip(t, 0, n - 1, out=t)
        t[nan] = 0                      # replaced below; keeps the cast defined
        idx = t.astype(np.uint16)
        idx[v < lo] = self.outside_low_index
        idx[v > hi] = self.outside_high_index
        idx[nan] = self.nodata_index
        return idx

    def rgba8_table(self, nodata_alpha: int = 255) -> np.ndarray:
        """Packed colours (n + 3,) uint32, little-endian RGBA: ``np.take(table, index)`` viewed as
        uint8 gives R, G, B, A per pixel. ``nodata_alpha`` 0 makes nodata transparent."""
        rgba = np.concatenate([self.rgb8, np.full((len(self.rgb8), 1), 255, np.uint8)], axis=1)
        rgba[self.nodata_index, 3] = nodata_alpha
        return np.ascontiguousarray(rgba).view("<u4").reshape(-1)

    def with_quantile_breaks(self, values, steps: int | None = None) -> Lut:
        """A stepped table whose breaks are quantiles of the finite ``values`` inside the domain.

        ``steps`` defaults to the ramp's. Ties (many equal values) merge classes, so fewer than
        ``steps`` classes may result.
        """
        ramp = self.ramp
        k = steps if steps is not None else (ramp.steps if ramp is not None else None)
        if ramp is None or ramp.kind == "qualitative" or k is None:
            raise ComposeError(f'ramp "{self.name}": quantile breaks need a stepped continuous ramp '
                               "('steps')")
        edges = quantile_breaks(values, k, ramp.domain, self.name)
        return replace(stepped_lut(ramp, edges), step_method="quantile", quantile_pending=False)


def quantile_breaks(values, k: int, domain: tuple[float, float], name: str = "") -> np.ndarray:
    """Edges (<= k + 1,) of k classes holding equal shares of the finite ``values`` in ``domain``."""
    v = np.asarray(values, dtype=float).ravel()
    lo, hi = domain
    v = v[np.isfinite(v) & (v >= lo) & (v <= hi)]
    if v.size == 0:
        raise ComposeError(f'ramp "{name}": no finite data inside the domain [{lo:g}, {hi:g}] '
                           "to compute quantile breaks from")
    inner = np.quantile(v, np.linspace(0.0, 1.0, k + 1)[1:-1])
    inner = np.unique(inner[(inner > lo) & (inner < hi)])
    return np.concatenate([[lo], inner, [hi]])


def _assemble(ramp: Ramp, values, rgb, edges, **kw) -> Lut:
    rgb8 = to_rgb8(np.concatenate([rgb, [ramp.outside_low, ramp.outside_high, ramp.nodata]]))
    return Lut(ramp.name, ramp.kind, np.asarray(values, dtype=float), rgb8, srgb_to_lab(rgb8 / 255.0),
               np.asarray(edges, dtype=float), ramp=ramp, **kw)


def stepped_lut(ramp: Ramp, edges: np.ndarray) -> Lut:
    """One entry per class interval between ``edges`` (k + 1,)."""
    edges = np.asarray(edges, dtype=float)
    widths = np.diff(edges)
    even = np.allclose(widths, widths[0], rtol=1e-12, atol=0)
    kw = {"origin": float(edges[0]), "width": float(widths[0])} if even else {}
    method = ramp.step_method if ramp.steps else None
    return _assemble(ramp, (edges[:-1] + edges[1:]) / 2, ramp.class_colors(edges), edges,
                     stepped=True, step_method=method, quantile_pending=method == "quantile", **kw)


def lut_for(ramp: Ramp, samples: int | None = None) -> Lut:
    """The lookup table of ``ramp`` (see the module docstring)."""
    if ramp.kind == "qualitative":
        rgb = np.array([c.rgb for c in ramp.classes])
        plain = replace(ramp, outside_low=ramp.nodata, outside_high=ramp.nodata)
        return _assemble(plain, [c.value for c in ramp.classes], rgb, np.empty(0))
    edges = ramp.class_edges()
    if edges is not None:
        return stepped_lut(ramp, edges)
    n = int(samples or ramp.samples)
    if not 2 <= n <= 65533:
        raise ComposeError(f'ramp "{ramp.name}": samples must be 2 to 65533, got {n}')
    lo, hi = ramp.domain
    if ramp.kind == "threshold":
        n1 = int(np.clip(round(n * (ramp.at - lo) / (hi - lo)), 1, n - 1))
        w1, w2 = (ramp.at - lo) / n1, (hi - ramp.at) / (n - n1)
        edges = np.concatenate([lo + w1 * np.arange(n1), ramp.at + w2 * np.arange(n - n1 + 1)])
        edges[-1] = hi
        values = (edges[:-1] + edges[1:]) / 2
        return _assemble(ramp, values, ramp.colors_at(values), edges, origin=lo, width=w1,
                         split=(float(ramp.at), n1, w2))
    values = np.linspace(lo, hi, n)
    step = (hi - lo) / (n - 1)
    edges = np.concatenate([[lo], (values[:-1] + values[1:]) / 2, [hi]])
    return _assemble(ramp, values, ramp.colors_at(values), edges, origin=lo - step / 2, width=step)


def drawn_samples(ramp: Ramp, n: int = 11) -> tuple[np.ndarray, np.ndarray]:
    """``(values, rgb8)``: n evenly spaced data values across the domain and the 8-bit colours
    drawn there (the class colours of a stepped ramp); for a qualitative ramp its classes."""
    if ramp.kind == "qualitative":
        return (np.array([c.value for c in ramp.classes]), to_rgb8(np.array([c.rgb for c in ramp.classes])))
    values = np.linspace(*ramp.domain, n)
    if ramp.stepped:
        lut = lut_for(ramp)
        return values, lut.rgb8[lut.index(values)]
    return values, to_rgb8(ramp.colors_at(values))
