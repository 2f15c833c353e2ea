"""Recording a layer's paints for the check's cache and replaying them
(:mod:`compose.check_cache`): what a layer paints splits into *where and how much* (each paint's
coverage and, for rasters, its lookup-table index, kept on the canvas grid) and *in what colour*
(a flat colour or the ramp's palette, taken from the style each time).
"""
from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from compose.check_cache.store import CACHE_VERSION
from compose.layers.base import Paint, Palette, palette_from_lut

__all__ = ["layer_colors", "lut_of", "Recorder", "CachedLayer"]


def lut_of(spec, ramps) -> Any | None:
    """The lookup table a raster layer draws through, or None (no ramp, or breaks decided from
    the data)."""
    ramp = ramps.get(getattr(spec.options, "ramp", None))
    if ramp is None:
        return None
    lut = ramp.lut()
    return None if getattr(lut, "quantile_pending", False) else lut


def layer_colors(spec, ramps) -> dict[str, Any] | None:
    """Each part's colour as the layer kind paints it: part -> an sRGB triple in [0, 1], a
    :class:`Palette`, or None (the part is not drawn). None for a kind this cache does not know
    (or a ramp whose breaks come from the data): such layers are never cached."""
    o = spec.options
    halo = getattr(getattr(o, "halo", None), "color", None)
    kind = spec.kind
    if kind in ("lines", "contours"):
        return {"halo": halo, "stroke": o.stroke}
    if kind == "areas":
        return {"fill": o.fill, "halo": halo, "stroke": o.stroke}
    if kind == "points":
        return {"stroke": o.stroke, "marker": o.fill}
    if kind == "labels":
        return {"halo": halo, "text": o.color}
    if kind == "relief":
        from compose.ramps.relief import LEVELS, relief_colors

        rgb8, s = relief_colors(o.tint, o.shadow, o.strength, o.altitude)
        return {"shade": Palette(rgb8=np.vstack([rgb8, [[0, 0, 0]]]), values=np.append(s, np.nan),
                                 nodata=LEVELS)}
    if kind in ("field", "classes"):
        lut = lut_of(spec, ramps)
        if lut is None:
            return None
        nodata = getattr(o, "nodata", None)
        transparent = isinstance(nodata, str)
        return {"data": palette_from_lut(lut, None if (nodata is None or transparent) else nodata)}
    return None


def _same_color(paint: Paint, want: Any) -> bool:
    if isinstance(want, Palette):
        p = paint.palette
        return (p is not None and p.nodata == want.nodata and np.array_equal(p.rgb8, want.rgb8)
                and np.array_equal(p.values, want.values, equal_nan=True))
    return paint.palette is None and want is not None and paint.color is not None \
        and tuple(float(v) for v in paint.color) == tuple(float(v) for v in want)


#: k / 255 in float32 for k = 0..255, as ``np.divide(k, np.float32(255), dtype=np.float32)``.
_EIGHT = np.divide(np.arange(256, dtype=np.uint8), np.float32(255), dtype=np.float32)


def _as_8bit(alpha: np.ndarray) -> np.ndarray | None:
    """``alpha`` (float32 coverage in [0, 1]) as uint8 k when every value is exactly k / 255 in
    float32 (what 8-bit coverage divided by 255 gives), else None. A constant coverage (a
    field's ones, an empty halo) is decided from its extremes; anything else value by value."""
    lo, hi = float(alpha.min(initial=np.inf)), float(alpha.max(initial=-np.inf))
    if not (0.0 <= lo and hi <= 1.0):
        return None
    if lo == hi:
        k = int(np.rint(np.float32(lo) * np.float32(255)))
        return np.full(alpha.shape, k, np.uint8) if _EIGHT[k] == np.float32(lo) else None
    a8 = np.rint(alpha * np.float32(255)).astype(np.uint8)
    return a8 if np.array_equal(np.divide(a8, np.float32(255), dtype=np.float32), alpha) else None


class _Slot:
    """The j-th paint of a layer's windows, on the canvas grid (core pixels only)."""

    def __init__(self, shape: tuple[int, int], indexed: bool):
        self.alpha8: np.ndarray | None = np.zeros(shape, np.uint8)
        self.alpha32: np.ndarray | None = None
        self.index = np.zeros(shape, np.uint16) if indexed else None

    def put(self, core, alpha: np.ndarray, index: np.ndarray | None) -> None:
        """Keep a window's ``core`` coverage (float32, or uint8 k for k / 255 exactly, as
        :func:`_as_8bit` gives it) and lookup-table indices."""
        if self.alpha8 is not None:
            a8 = alpha if alpha.dtype == np.uint8 else _as_8bit(alpha)
            if a8 is not None:
                self.alpha8[core] = a8
            else:            # not 8-bit coverage: keep float32 from here on (exact either way)
                self.alpha32 = np.divide(self.alpha8, np.float32(255), dtype=np.float32)
                self.alpha8 = None
        if self.alpha32 is not None:
            self.alpha32[core] = alpha if alpha.dtype != np.uint8 else \
                np.divide(alpha, np.float32(255), dtype=np.float32)
        if self.index is not None and index is not None:
            self.index[core] = index


def _window_id(window) -> str:
    return f"{window.row},{window.col},{window.height},{window.width}"


class Recorder:
    """A real layer, passed through, whose paints are kept on the canvas grid for the cache."""

    def __init__(self, layer, key: str, colors: dict, canvas, extra: dict):
        self._layer = layer
        self.key = key
        self._colors = colors
        self._shape = (canvas.height, canvas.width)
        self._slots: list[_Slot] = []
        self._windows: dict[str, list[str]] = {}
        self._extra = extra
        self.ok = True
        #: in a check's helper process: each window's paints as they come (see forward)
        self._sent: list | None = None

    def __getattr__(self, name: str) -> Any:
        if name == "_sent":         # before __init__ (unpickling): not forwarding
            return None
        return getattr(self._layer, name)

    def paint(self, window, transform, height, width) -> list[Paint]:
        paints = self._layer.paint(window, transform, height, width)
        if not self.ok:
            return paints
        inner = window.inner
        got = []
        for p in paints:
            if p.part not in self._colors or not _same_color(p, self._colors[p.part]):
                self.ok = False         # painted in a colour this cache cannot reproduce
                return paints
            alpha = np.ascontiguousarray(p.alpha[inner])
            index = None if p.index is None else p.index[inner]
            if self._sent is not None:  # sent to the check's process: copies, 8-bit when exact
                a8 = _as_8bit(alpha)
                alpha = a8 if a8 is not None else np.array(alpha)
                index = None if index is None else np.array(index)
            got.append((p.part, p.palette is not None, alpha, index))
        if self._sent is not None:
            self._sent.append((_window_id(window), got))
        else:
            self._keep(window, got)
        return paints

    def _keep(self, window, got: list) -> None:
        """Put a window's paints (part, indexed, core coverage, core indices), in paint order,
        into this layer's slots on the canvas grid."""
        core = window.core
        for j, (_, indexed, alpha, index) in enumerate(got):
            if j == len(self._slots):
                self._slots.append(_Slot(self._shape, indexed))
            slot = self._slots[j]
            if (slot.index is None) == indexed:
                self.ok = False
                return
            slot.put(core, alpha, index)
        self._windows[_window_id(window)] = [part for part, *_ in got]

    def forward(self) -> None:
        """From now on keep nothing on the canvas grid: each window's paints are held for
        :meth:`take` (in a check's helper process, whose windows the check's own process
        records with :meth:`adopt`, in window order; see :class:`compose.api._Helpers`)."""
        self._sent = []

    def take(self, window) -> tuple[bool, list | None]:
        """(whether this layer can still be cached, ``window``'s paints or None when it was not
        painted) since the last take; for :meth:`adopt`."""
        wid = _window_id(window)
        sent, self._sent = self._sent or [], []
        got = next((g for w, g in sent if w == wid), None)
        return self.ok, got

    def adopt(self, window, taken: tuple[bool, list | None]) -> None:
        """Record ``window`` as another process painted it (:meth:`take` there): the same slots
        and windows as painting it here."""
        ok, got = taken
        if not self.ok:
            return
        if not ok:
            self.ok = False
        elif got is not None:
            self._keep(window, got)

    def entry(self, margin: int, window_size: int) -> tuple[dict, dict[str, np.ndarray]] | None:
        """(meta, arrays) to store, or None when this layer cannot be cached."""
        if not self.ok or not self._windows:
            return None
        arrays: dict[str, np.ndarray] = {}
        for j, s in enumerate(self._slots):
            arrays[f"a{j}"] = s.alpha8 if s.alpha8 is not None else s.alpha32  # type: ignore
            if s.index is not None:
                arrays[f"i{j}"] = s.index
        meta = {"version": CACHE_VERSION, "key": self.key, "margin": int(self._layer.margin),
                "walk": [int(margin), int(window_size)], "windows": self._windows,
                "slots": len(self._slots), **self._extra}
        return meta, arrays


class CachedLayer:
    """A layer replayed from its cache entry: the stored coverage and indices, painted in the
    colours the style gives now."""

    def __init__(self, spec, meta: dict, arrays, colors: dict, ramps: Mapping[str, Any]):
        self.spec = spec
        self.margin = int(meta["margin"])
        self.meta = meta
        self._arrays = arrays
        self._colors = colors
        # every slot's arrays picked now: window threads share this layer read-only
        self._slots = {j: (arrays[f"a{j}"], arrays[f"i{j}"] if f"i{j}" in arrays.files else None)
                       for j in range(int(meta["slots"]))}
        self.unplaced = list(meta.get("unplaced", []))
        if spec.kind in ("field", "classes", "relief"):
            self.palette = next(iter(colors.values()))
        if spec.kind in ("field", "classes"):     # what the legend reads of a raster layer
            self.ramp = ramps[spec.options.ramp]
            self.lut = self.ramp.lut()
            self.transparent_nodata = isinstance(getattr(spec.options, "nodata", None), str)

    def paint(self, window, transform, height, width) -> list[Paint]:
        parts = self.meta["windows"].get(_window_id(window))
        if parts is None:
            raise KeyError(f"cache entry of layer {self.spec.name!r} has no window {window}")
        r0, c0, h, w = window.padded
        H, W = self._arrays_shape()
        rs, re_ = max(r0, 0), min(r0 + h, H)
        cs, ce = max(c0, 0), min(c0 + w, W)
        paints = []
        for j, part in enumerate(parts):
            a_all, i_all = self._slots[j]
            alpha = np.zeros((h, w), np.float32)
            if a_all.dtype == np.uint8:
                np.divide(a_all[rs:re_, cs:ce], np.float32(255), dtype=np.float32,
                          out=alpha[rs - r0:re_ - r0, cs - c0:ce - c0])
            else:
                alpha[rs - r0:re_ - r0, cs - c0:ce - c0] = a_all[rs:re_, cs:ce]
            want = self._colors[part]
            if i_all is not None:
                index = np.zeros((h, w), np.uint16)
                index[rs - r0:re_ - r0, cs - c0:ce - c0] = i_all[rs:re_, cs:ce]
                paints.append(Paint(part, alpha, index=index, palette=want))
            else:
                paints.append(Paint(part, alpha, color=want))
        return paints

    def _arrays_shape(self) -> tuple[int, int]:
        return tuple(self.meta["shape"])  # type: ignore[return-value]

    def close(self) -> None:
        closer = getattr(self._arrays, "close", None)
        if closer is not None:
            closer()
