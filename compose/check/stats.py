"""Per-layer statistics gathered window by window as mergeable histograms.

Nothing here converts every pixel through a colour library: raster layers are counted by their
lookup-table index (``np.bincount``), flat-coloured parts by their coverage sum, and only the
few distinct colours are converted to CIELAB at the end. Contrast of an overlay against what lies
beneath it is binned in steps of 0.01 of WCAG contrast ratio, so thresholds such as 3.0 and 4.5
fall exactly on bin edges.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from compose.color.bulk import CHANNEL_XYZ  # per-channel linear-light x matrix tables (8-bit)
from compose.color.lab import srgb_to_lch
from compose.color.srgb import srgb_to_linear
from compose.color.wcag import WCAG_Y

__all__ = ["CONTRAST_STEP", "N_CONTRAST", "N_LIGHTNESS", "BENEATH_BITS", "N_BENEATH", "PartStats",
           "LayerStats", "Statistics", "gray_stride", "weighted_percentiles", "spearman_from_table",
           "lightness_of_rgb8", "lightness_bins_of_rgb8", "lightness_bins_of_luminance",
           "luminance_of_planes", "luminance_of_rgb8",
           "contrast_bins",
           "contrast_share", "beneath_color_codes", "beneath_color_centres", "histogram_percentiles"]

CONTRAST_STEP = 0.01
N_CONTRAST = 2000          # bins [1.00, 1.01), ... [20.99, 21.00]
N_LIGHTNESS = 101          # L* bins of width 1, centres 0..100
BENEATH_BITS = 6           # bits per channel of the beneath-colour histogram (4 codes per bin)
N_BENEATH = 1 << (3 * BENEATH_BITS)
# canvases of this many pixels and more sample the grey order every 4th row and column
GRAY_COARSE_PIXELS = 16_000_000


def gray_stride(width: int, height: int) -> int:
    """Rows (and columns) apart of the grey-order samples on a ``width`` x ``height`` canvas:
    the rows and columns whose canvas index is a multiple of it are sampled (the value x L*
    table, the blended colours and their counts, :attr:`LayerStats.value_lightness`,
    ``value_color``, ``value_count``). 2 (a quarter of the pixels); 4 (a sixteenth) on canvases
    of :data:`GRAY_COARSE_PIXELS` and more, which still leaves a million samples or more: grey
    order is a rank correlation between value and L* (Spearman), which a regular sample of a
    million pixels estimates as well as every pixel, and the blended colours are means. The
    coarser step is our choice (it halves the statistics' cost of an 8192 px render; every
    example style's and the 8192 benchmark's check verdicts are the same with either)."""
    return 4 if width * height >= GRAY_COARSE_PIXELS else 2


def contrast_bins(ratio: np.ndarray) -> np.ndarray:
    """Bin index of WCAG contrast ratios in [1, 21] (bin i holds [1 + i/100, 1 + (i+1)/100))."""
    idx = np.floor((np.asarray(ratio, dtype=np.float64) - 1.0) / CONTRAST_STEP + 1e-9)
    return np.clip(idx, 0, N_CONTRAST - 1).astype(np.int64)


def luminance_of_planes(planes: np.ndarray) -> np.ndarray:
    """WCAG relative luminance of (3, n) gamma-encoded float sRGB -> (n,)."""
    lin = srgb_to_linear(planes.T)
    return lin @ WCAG_Y


def luminance_of_rgb8(rgb8: np.ndarray) -> np.ndarray:
    """WCAG relative luminance (= CIE Y, white 1) of 8-bit sRGB pixels (n, 3) by lookup tables."""
    return (np.take(CHANNEL_XYZ[1, 0], rgb8[:, 0]) + np.take(CHANNEL_XYZ[1, 1], rgb8[:, 1])
            + np.take(CHANNEL_XYZ[1, 2], rgb8[:, 2]))


_Y_LEVELS = 1 << 16
# rounded CIELAB L* (0..100) of luminance Y = i / 65535; one step of Y moves L* by <= 0.014
_L_BIN = np.clip(np.rint(116 * np.where(np.arange(_Y_LEVELS) / (_Y_LEVELS - 1) > (6 / 29) ** 3,
                                         np.cbrt(np.arange(_Y_LEVELS) / (_Y_LEVELS - 1)),
                                         np.arange(_Y_LEVELS) / (_Y_LEVELS - 1) / (3 * (6 / 29) ** 2)
                                         + 4 / 29) - 16), 0, 100).astype(np.uint8)


def lightness_bins_of_rgb8(rgb8: np.ndarray) -> np.ndarray:
    """Rounded CIELAB L* (uint8, 0..100) of 8-bit sRGB pixels (n, 3): Y by lookup tables, then a
    65536-entry Y -> L* table (equal to rint(L*) except within ~0.01 of a half-integer)."""
    return lightness_bins_of_luminance(luminance_of_rgb8(rgb8))


def lightness_bins_of_luminance(y: np.ndarray) -> np.ndarray:
    """:func:`lightness_bins_of_rgb8` from the pixels' luminance (float32 (n,), as
    :func:`luminance_of_rgb8` gives it; not changed), for callers that have it already."""
    y = np.multiply(y, np.float32(_Y_LEVELS - 1))
    y += np.float32(0.5)
    idx = y.astype(np.int32)
    np.minimum(idx, _Y_LEVELS - 1, out=idx)
    return np.take(_L_BIN, idx)


def contrast_share(hist: np.ndarray | None, limit: float) -> float:
    """Share (0-1) of a contrast histogram (see :func:`contrast_bins`) at or above ``limit``.

    A limit on a bin edge (3.0, 4.5) is exact; a limit inside a bin counts only the bins wholly
    above it (never overstates the share). NaN for an empty histogram.
    """
    if hist is None:
        return float("nan")
    total = float(np.sum(hist))
    if total <= 0:
        return float("nan")
    first = int(np.ceil((float(limit) - 1.0) / CONTRAST_STEP - 1e-6))
    first = min(max(first, 0), N_CONTRAST)
    return float(np.sum(hist[first:]) / total)


def beneath_color_codes(rgb8: np.ndarray) -> np.ndarray:
    """Bin codes (n,) of 8-bit colours (n, 3) in the beneath-colour histogram (BENEATH_BITS/channel)."""
    q = (rgb8 >> (8 - BENEATH_BITS)).astype(np.int64)
    return (q[:, 0] << (2 * BENEATH_BITS)) | (q[:, 1] << BENEATH_BITS) | q[:, 2]


def beneath_color_centres(codes: np.ndarray | None = None) -> np.ndarray:
    """sRGB floats (N_BENEATH, 3) at the centre of each beneath-colour bin; ``codes``: of
    those bins only, (len(codes), 3) (the same values: the rules ask for the bins a map
    filled, a few hundred of the 262,144, whose whole table took 4-6 ms of a draft's 21 ms of
    rules on the 8192 benchmark)."""
    codes = np.arange(N_BENEATH) if codes is None else np.asarray(codes, dtype=np.int64)
    mask = (1 << BENEATH_BITS) - 1
    q = np.stack([(codes >> (2 * BENEATH_BITS)) & mask, (codes >> BENEATH_BITS) & mask, codes & mask], -1)
    step = 1 << (8 - BENEATH_BITS)
    return (q * step + (step - 1) / 2.0) / 255.0


def histogram_percentiles(hist: np.ndarray | None, qs=(5, 50, 95)) -> list[float]:
    """Percentiles of a histogram whose bin i holds the integer value i (e.g. rounded L*)."""
    if hist is None:
        return [float("nan")] * len(qs)
    return weighted_percentiles(np.arange(len(hist), dtype=float), hist, qs)


def lightness_of_rgb8(rgb8: np.ndarray) -> np.ndarray:
    """CIELAB L* (float32) of 8-bit sRGB pixels (n, 3) by lookup tables: Y = sum of 3 tables."""
    y = (np.take(CHANNEL_XYZ[1, 0], rgb8[:, 0]) + np.take(CHANNEL_XYZ[1, 1], rgb8[:, 1])
         + np.take(CHANNEL_XYZ[1, 2], rgb8[:, 2]))
    eps = np.float32((6 / 29) ** 3)
    f = np.where(y > eps, np.cbrt(y), y * np.float32(1 / (3 * (6 / 29) ** 2)) + np.float32(4 / 29))
    return np.float32(116) * f - np.float32(16)


def weighted_percentiles(values: np.ndarray, weights: np.ndarray, qs=(5, 50, 95)) -> list[float]:
    """Percentiles (0-100) of ``values`` with ``weights`` (inverse of the weighted CDF)."""
    values = np.asarray(values, dtype=float)
    weights = np.asarray(weights, dtype=float)
    keep = weights > 0
    if not keep.any():
        return [float("nan")] * len(qs)
    v, w = values[keep], weights[keep]
    order = np.argsort(v, kind="stable")
    v, w = v[order], w[order]
    cdf = np.cumsum(w) / w.sum()
    return [float(v[min(np.searchsorted(cdf, q / 100.0 - 1e-12), v.size - 1)]) for q in qs]


def _midranks(weights: np.ndarray) -> np.ndarray:
    """Mid-ranks of ordered categories with the given (weighted) counts."""
    c = np.cumsum(weights)
    return c - weights / 2.0


def spearman_from_table(table: np.ndarray, row_values: np.ndarray, col_values: np.ndarray) -> float:
    """Spearman's rho from a weighted contingency table (rows: one variable, columns: the other).

    Ties share their mid-rank, as in the usual tie-corrected rho (Pearson correlation of ranks).
    """
    table = np.asarray(table, dtype=float)
    rmask = np.isfinite(row_values) & (table.sum(axis=1) > 0)
    table = table[rmask]
    rv = np.asarray(row_values)[rmask]
    cmask = table.sum(axis=0) > 0
    table = table[:, cmask]
    cv = np.asarray(col_values)[cmask]
    if table.size == 0 or table.sum() == 0:
        return float("nan")
    ro = np.argsort(rv, kind="stable")
    table = table[ro]
    rv = rv[ro]
    co = np.argsort(cv, kind="stable")
    table = table[:, co]
    # merge rows with equal values (ties)
    _, rstart = np.unique(rv, return_index=True)
    table = np.add.reduceat(table, rstart, axis=0)
    rw, cw = table.sum(axis=1), table.sum(axis=0)
    rr, cr = _midranks(rw), _midranks(cw)
    n = table.sum()
    mr, mc = (rw * rr).sum() / n, (cw * cr).sum() / n
    cov = (table * np.outer(rr - mr, cr - mc)).sum()
    vr = (rw * (rr - mr) ** 2).sum()
    vc = (cw * (cr - mc) ** 2).sum()
    if vr <= 0 or vc <= 0:
        return float("nan")
    return float(cov / np.sqrt(vr * vc))


class _BeneathColors:
    """The descriptor behind :attr:`PartStats.beneath_colors`: the dense (N_BENEATH,) histogram,
    made on first read from the few (code, weight) pairs a window measured
    (:meth:`PartStats.add_beneath`), so a window's statistics never hold, zero or add a 2 MB
    array of mostly zeros (a window of the 8192 benchmark sees about 640 of its 262,144 bins).
    A dataclass field's default is this descriptor's value on the class: None."""

    def __get__(self, obj, owner=None) -> np.ndarray | None:
        if obj is None:
            return None
        d = obj.__dict__
        sparse = d.get("_beneath_sparse")
        if sparse is not None:
            dense = np.zeros(N_BENEATH)
            dense[sparse[0]] = sparse[1]        # codes are distinct: 0 + w = w exactly
            d["_beneath_dense"], d["_beneath_sparse"] = dense, None
        return d.get("_beneath_dense")

    def __set__(self, obj, value: np.ndarray | None) -> None:
        obj.__dict__["_beneath_dense"] = value
        obj.__dict__["_beneath_sparse"] = None


@dataclass
class PartStats:
    """One part of a layer (shade, data, fill, stroke, halo, text, marker) over the whole canvas.

    colors: (n, 3) uint8 colours of the part; weights: (n,) coverage-weighted pixel counts.
    contrast: (N_CONTRAST,) coverage-weighted histogram of the WCAG contrast between the part's
    colour and what lay beneath it just before it was drawn (overlays only).
    ground_contrast: the same against what lay beneath the whole layer (differs from ``contrast``
    for a stroke drawn over its own halo).
    beneath_lightness: (N_LIGHTNESS,) L* histogram of what lay beneath (overlays only).
    beneath_colors: (N_BENEATH,) histogram of what lay beneath, 8-bit colours cut to
    BENEATH_BITS per channel (overlays only; for colour differences beyond lightness). A window
    measures it as (code, weight) pairs (:meth:`add_beneath`); reading it gives the dense array.
    seen: (n,) the weights as seen on the composite -- each pixel's coverage times what the
    layers drawn later with blend "normal" let through of it (1 - their alpha, multiplied) --
    for a relief's shading; None when nothing was drawn normally over it (then equal to
    ``weights``).
    """

    part: str
    colors: np.ndarray
    weights: np.ndarray
    contrast: np.ndarray | None = None
    ground_contrast: np.ndarray | None = None
    beneath_lightness: np.ndarray | None = None
    beneath_colors: _BeneathColors = _BeneathColors()
    seen: np.ndarray | None = None

    def add_beneath(self, codes: np.ndarray, weights: np.ndarray) -> None:
        """Add weights (float64 (k,)) to the beneath-colour bins ``codes`` ((k,) distinct
        integers in [0, N_BENEATH)); the arrays are kept, not copied."""
        d = self.__dict__
        dense, sparse = d.get("_beneath_dense"), d.get("_beneath_sparse")
        if dense is None and sparse is None:
            d["_beneath_sparse"] = (codes, weights)
            return
        if dense is None:
            dense = self.beneath_colors     # the pairs so far, spread
            assert dense is not None
        dense[codes] += weights             # codes distinct: each bin added to once

    def copy(self) -> PartStats:
        """A copy whose histograms can be added to without touching this one."""
        sparse = self.__dict__.get("_beneath_sparse")
        out = PartStats(self.part, self.colors, self.weights.copy(),
                        *(None if a is None else a.copy() for a in (
                            self.contrast, self.ground_contrast, self.beneath_lightness,
                            None if sparse is not None else self.beneath_colors, self.seen)))
        if sparse is not None:
            out.add_beneath(sparse[0].copy(), sparse[1].copy())
        return out

    @property
    def seen_weights(self) -> np.ndarray:
        """:attr:`seen`, or the weights themselves when nothing was drawn normally over it."""
        return self.weights if self.seen is None else self.seen

    def merge(self, other: PartStats) -> None:
        """Add ``other`` (the same part measured elsewhere) to this."""
        if self.seen is not None or other.seen is not None:   # before the weights change
            self.seen = self.seen_weights + other.seen_weights
        self.weights += other.weights
        for name in ("contrast", "ground_contrast", "beneath_lightness"):
            a, b = getattr(self, name), getattr(other, name)
            if b is None:
                continue
            if a is None:
                setattr(self, name, b.copy())
            else:               # in place: this part's own arrays (merge copies what it adopts)
                a += b
        sparse = other.__dict__.get("_beneath_sparse")
        if sparse is not None:
            self.add_beneath(sparse[0].copy(), sparse[1].copy())
        else:
            b = other.beneath_colors
            if b is None:
                return
            a = self.beneath_colors
            if a is None:
                self.beneath_colors = b.copy()
            else:
                a += b


class _EntryRows:
    """The descriptor behind :attr:`LayerStats.value_lightness`, ``value_color`` and
    ``value_count`` (one row per palette entry): the dense array, made on first read from the
    rows a window measured (:meth:`LayerStats.add_rows`: the entries lo..lo + m - 1 it saw), so
    a window's statistics never allocate, zero or add the table's other rows (a 1027-entry
    theme's L* table is 0.8 MB; a window of the 8192 benchmark sees a few hundred entries).
    A dataclass field's default is this descriptor's value on the class: None."""

    def __set_name__(self, owner, name: str) -> None:
        self.dense, self.rows = f"_{name}_dense", f"_{name}_rows"

    def __get__(self, obj, owner=None) -> np.ndarray | None:
        if obj is None:
            return None
        d = obj.__dict__
        rows = d.get(self.rows)
        if rows is not None:
            lo, block, n = rows
            dense = np.zeros((n,) + block.shape[1:])
            dense[lo:lo + block.shape[0]] = block     # 0 + x = x exactly: as if added
            d[self.dense], d[self.rows] = dense, None
        return d.get(self.dense)

    def __set__(self, obj, value: np.ndarray | None) -> None:
        obj.__dict__[self.dense] = value
        obj.__dict__[self.rows] = None

    def measured(self, obj) -> bool:
        """Whether the layer measures these rows (dense or pending), without making them."""
        d = obj.__dict__
        return d.get(self.dense) is not None or d.get(self.rows) is not None

    def add(self, obj, lo: int, block: np.ndarray, n: int) -> None:
        """Add ``block`` (m rows, float64, owned from now on) to rows lo..lo + m - 1 of an
        (n, ...) table."""
        d = obj.__dict__
        rows = d.get(self.rows)
        if d.get(self.dense) is None and (rows is None or rows[1].shape[0] == 0):
            d[self.rows] = (lo, block, n)
            return
        dense = self.__get__(obj)
        assert dense is not None
        dense[lo:lo + block.shape[0]] += block

    def pending(self, obj) -> tuple[int, np.ndarray, int] | None:
        """(lo, block, n) when only rows were measured, else None."""
        return obj.__dict__.get(self.rows)


_ROW_TABLES = ("value_lightness", "value_color", "value_count")


@dataclass
class LayerStats:
    """Everything measured of one layer; merges across windows by addition."""

    name: str
    role: str
    kind: str
    parts: dict[str, PartStats] = field(default_factory=dict)
    covered: float = 0.0                       # coverage-weighted pixel count of the layer
    values: np.ndarray | None = None           # (n,) data value per palette entry (themes)
    value_lightness: _EntryRows = _EntryRows()  # (n, N_LIGHTNESS) palette index x composite L*
    value_color: _EntryRows = _EntryRows()      # (n, 3) sums of the composite's linear RGB per entry
    value_count: _EntryRows = _EntryRows()      # (n,) pixels summed into value_color
    nodata_weight: float = 0.0                 # pixels drawn in the no-data colour
    nodata_index: int = -1                     # palette entry of the no-data colour (themes), or -1
    figure: tuple[str, str] | None = None      # overlays: (part judged as the mark, its colour key)
    outline: str | None = None                 # overlays: the part drawn beneath the figure

    def empty_like(self) -> LayerStats:
        """The same layer with nothing measured yet (a window's statistics start from this):
        tables measured per palette entry start as no rows of the same shape, all zeros when
        read."""
        out = LayerStats(name=self.name, role=self.role, kind=self.kind,
                         values=self.values, nodata_index=self.nodata_index,
                         figure=self.figure, outline=self.outline)
        for name in _ROW_TABLES:
            desc = LayerStats.__dict__[name]
            pending = desc.pending(self)
            if pending is not None:
                trailing, n = pending[1].shape[1:], pending[2]
            else:
                table = getattr(self, name)
                if table is None:
                    continue
                trailing, n = table.shape[1:], table.shape[0]
            out.__dict__[desc.rows] = (0, np.zeros((0,) + trailing), n)     # no rows yet
        return out

    def measures(self, name: str) -> bool:
        """Whether the table ``name`` (value_lightness, value_color, value_count) is measured,
        without making a dense table of rows only measured in part."""
        return LayerStats.__dict__[name].measured(self)

    def add_rows(self, name: str, lo: int, block: np.ndarray) -> None:
        """Add ``block`` (m rows, float64, owned from now on) to rows lo..lo + m - 1 of the table
        ``name`` (measured: see :meth:`measures`)."""
        desc = LayerStats.__dict__[name]
        pending = desc.pending(self)
        n = pending[2] if pending is not None else getattr(self, name).shape[0]
        desc.add(self, lo, block, n)

    def merge(self, other: LayerStats) -> None:
        """Add ``other`` (the same layer measured elsewhere, e.g. another window) to this."""
        for key, part in other.parts.items():
            if key in self.parts:
                self.parts[key].merge(part)
            else:
                self.parts[key] = part.copy()
        self.covered += other.covered
        self.nodata_weight += other.nodata_weight
        if not (other.measures("value_color") and other.measures("value_count")):
            names: tuple[str, ...] = ("value_lightness",)
        else:
            names = _ROW_TABLES
        for name in names:
            desc = LayerStats.__dict__[name]
            pending = desc.pending(other)
            if pending is not None:         # only some rows: add those
                lo, block, n = pending
                if not block.shape[0]:
                    if not desc.measured(self):
                        desc.__set__(self, np.zeros((n,) + block.shape[1:]))
                    continue
                mine = self.__dict__.get(desc.dense)
                if mine is not None:        # ours is dense: add the rows in place
                    mine[lo:lo + block.shape[0]] += block
                else:                       # adopted or spread: ours to keep
                    desc.add(self, lo, block.copy(), n)
                continue
            theirs = getattr(other, name)
            if theirs is None:
                continue
            mine = getattr(self, name)
            if mine is None:
                setattr(self, name, theirs.copy())
            else:
                mine += theirs

    def composite_colors(self, min_pixels: float = 1.0) -> tuple[np.ndarray, np.ndarray] | None:
        """Mean composite colour (sRGB floats, (n, 3)) of each palette entry as the reader sees
        it -- the theme after every layer blended with it -- and the sampled pixel count (n,);
        NaN rows where fewer than ``min_pixels`` were sampled. None when not measured."""
        if self.value_color is None or self.value_lightness is None:
            return None
        from compose.color.srgb import linear_to_srgb
        n = self.value_count if self.value_count is not None else self.value_lightness.sum(axis=1)
        mean = self.value_color / np.maximum(n, 1e-9)[:, None]
        rgb = np.clip(linear_to_srgb(np.clip(mean, 0.0, 1.0)), 0.0, 1.0)
        rgb[n < min_pixels] = np.nan
        return rgb, n

    def colors_and_weights(self, parts=None, data_only: bool = False) -> tuple[np.ndarray, np.ndarray]:
        """All colours of the chosen parts (default all) with their weights.

        ``data_only`` drops the no-data entry of the palette part ("data") of a theme.
        """
        chosen = [(k, p) for k, p in self.parts.items() if parts is None or k in parts]
        if not chosen:
            return np.zeros((0, 3), np.uint8), np.zeros(0)
        weights = []
        for k, p in chosen:
            w = p.weights
            if data_only and k == "data" and 0 <= self.nodata_index < w.shape[0]:
                w = w.copy()
                w[self.nodata_index] = 0.0
            weights.append(w)
        return np.concatenate([p.colors for _, p in chosen]), np.concatenate(weights)

    def lightness_chroma(self, parts=None, data_only: bool = False) -> tuple[list[float], list[float]]:
        """(L* p5, p50, p95), (C* p5, p50, p95) of the layer's own colours, coverage-weighted.

        ``data_only``: leave a theme's no-data colour out (see :meth:`colors_and_weights`).
        """
        colors, weights = self.colors_and_weights(parts, data_only)
        if colors.shape[0] == 0:
            nan = [float("nan")] * 3
            return nan, nan
        lch = srgb_to_lch(colors / 255.0)
        return weighted_percentiles(lch[:, 0], weights), weighted_percentiles(lch[:, 1], weights)

    def grayscale_rho(self) -> float:
        """Spearman rho between data value and the composite's L* over this layer's pixels."""
        if self.value_lightness is None or self.values is None:
            return float("nan")
        return spearman_from_table(self.value_lightness, self.values, np.arange(N_LIGHTNESS, dtype=float))


@dataclass
class Statistics:
    """Statistics of a whole render: one :class:`LayerStats` per drawn layer, in drawing order."""

    width: int
    height: int
    layers: list[LayerStats]
    background: tuple[float, float, float]
    #: canvas pixels on which the blended colours are summed (the rows and columns of the
    #: canvas's own grid that are multiples of :func:`gray_stride`, :mod:`compose.measure`); -1:
    #: worked out from width and height. Set when statistics of several canvases are added up
    #: (:meth:`add_canvas`).
    sampled: int = -1

    @property
    def pixels(self) -> int:
        return self.width * self.height

    @property
    def sampled_pixels(self) -> int:
        """Pixels of the canvas the blended colours were summed on (see :attr:`sampled`)."""
        if self.sampled >= 0:
            return self.sampled
        step = gray_stride(self.width, self.height)
        return -(-self.width // step) * -(-self.height // step)

    def empty_like(self) -> Statistics:
        """The same render with nothing measured yet (a window's statistics start from this)."""
        return Statistics(width=self.width, height=self.height, background=self.background,
                          layers=[s.empty_like() for s in self.layers], sampled=self.sampled)

    def add_canvas(self, other: Statistics) -> Statistics:
        """Add the statistics of the same layers on another canvas (e.g. another zoom of a tile
        set): histograms add up like windows', and so do the canvas's pixels and sampled pixels
        (the result is a canvas of ``pixels`` x 1). Returns self."""
        pixels, sampled = self.pixels + other.pixels, self.sampled_pixels + other.sampled_pixels
        self.merge(other)
        self.width, self.height, self.sampled = pixels, 1, sampled
        return self

    def merge(self, other: Statistics) -> Statistics:
        """Add ``other`` (statistics of more windows of the same render) to this; returns self.

        Merging is addition, so windows measured anywhere sum to the same numbers in any order
        (up to floating-point rounding of the sums).
        """
        if [s.name for s in other.layers] != [s.name for s in self.layers]:
            raise ValueError("statistics of different renders cannot be merged")
        for mine, theirs in zip(self.layers, other.layers):
            mine.merge(theirs)
        return self

    def layer(self, name: str) -> LayerStats:
        for s in self.layers:
            if s.name == name:
                return s
        raise KeyError(name)
