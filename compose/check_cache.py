"""A disk cache of the check's prepared, geometry-dependent inputs (``compose check``).

A practitioner tunes colours, ramps, opacity, blend and halo colours and re-checks many times
while the sources and the geometry stay the same (``compose fix`` re-checks in a loop too). What
a layer paints splits in two: *where and how much* (each paint's coverage and, for rasters, its
lookup-table index) and *in what colour* (a flat colour or the ramp's palette). The first is
the expensive part (reading and warping rasters, hillshading, drawing lines and labels); it is
cached here per layer, on the canvas's grid, and the second is taken from the style each time.

A layer's entry is keyed by what decides its paints (common practice, as make does: a source is
unchanged while its path, size and modification time in nanoseconds are):

* its kind, its source file (path, size, mtime_ns; also a ``.ovr`` overview file and a
  GeoPackage's ``-wal`` journal beside it, when present) and its options with every colour
  replaced by a placeholder (``stroke``, ``fill``, ``color``, halo colours, ``tint``,
  ``shadow``, a no-data colour; a relief's ``strength``), so a colour is no part of the key
  but whether a part is drawn at all is;
* the canvas (CRS, transform, size, dpi) and the full canvas of a draft;
* for rasters drawn through a ramp: the lookup table's index layout (entry values, edges,
  steps), not its colours;
* for labels: the labels layers placed before it, and, when page furniture sits inside the
  map frame, the page, the layers and the ramps (the furniture's size depends on the legend);
* the modules that paint (size and mtime of compose's layer and source modules) and
  :data:`CACHE_VERSION`.

Layer ``opacity``, ``blend`` and ``role`` are applied after the cache and are no part of it.
An entry is one file (8-bit coverage where it is exact, else float32; uint16 indices; deflated),
written to a temporary file and renamed into place; an unreadable or corrupt entry is ignored
and rebuilt. A warm check opens no source, so it imports neither matplotlib nor rasterio, GDAL,
shapely or pyogrio. Where: ``$COMPOSE_CACHE`` (a directory, or ``off``), else
``$XDG_CACHE_HOME/compose``, else ``~/.cache/compose``; entries live in its ``check/`` folder.
"""
from __future__ import annotations

import contextlib
import dataclasses
import hashlib
import json
import os
import tempfile
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import numpy as np

from compose.layers.base import Paint, Palette, palette_from_lut
from compose.user_cache import CACHE_ENV, cache_dir

__all__ = ["CACHE_ENV", "CACHE_VERSION", "MAX_PIXELS", "MAX_BYTES", "cache_dir", "clear_cache",
           "trim_cache", "CheckCache",
           "CachedLayer", "layer_colors"]

#: Bumped whenever an entry's layout or meaning changes.
CACHE_VERSION = 1
#: Canvases larger than this many pixels are not cached (a full check at 8192 x 8192 would hold
#: and write hundreds of MB; its draft is cached).
MAX_PIXELS = 4096 * 4096
#: The check's entries are kept under this many bytes: after a check stores new entries, the
#: least recently used ones go (an entry read by a check counts as used).
MAX_BYTES = 2 << 30
#: Option names whose 3-number values are colours (replaced by a placeholder in the key).
COLOR_KEYS = frozenset({"stroke", "fill", "color", "tint", "shadow", "nodata", "background",
                         "ink"})
#: Options of a kind that only change its colours, never its coverage or indices.
COLOR_ONLY = {"relief": frozenset({"strength"})}
_SUBDIR = "check"
#: An array whose first SAMPLE_BYTES deflate to more than RAW_RATIO of their size is stored as it
#: is (a field's ramp indices: 4.5 MB deflated to 3.5 MB in 70 ms at the demo's 1500 x 1500).
SAMPLE_BYTES = 256 << 10
RAW_RATIO = 0.6


def clear_cache(root: Path | None) -> int:
    """Delete the check's entries under ``root``; returns how many files were removed."""
    if root is None:
        return 0
    n = 0
    for path in [*(root / _SUBDIR).glob("*.entry"), *(root / _SUBDIR).glob(".entry-*.part")]:
        with contextlib.suppress(OSError):
            path.unlink()
            n += 1
    return n


# --- keys ---------------------------------------------------------------------------------------

def _is_rgb(value: Any) -> bool:
    return (isinstance(value, (tuple, list)) and len(value) == 3
            and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value))


def _plain(value: Any, name: str | None = None, skip: frozenset[str] = frozenset()) -> Any:
    """A JSON-able copy of a style value with colours replaced by ``"colour"``."""
    if name is not None and name in COLOR_KEYS and _is_rgb(value):
        return "colour"
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {"@": type(value).__name__,
                **{f.name: _plain(getattr(value, f.name), f.name)
                   for f in dataclasses.fields(value) if f.name not in skip}}
    if isinstance(value, Mapping):
        return {str(k): _plain(v, str(k)) for k, v in value.items()}
    if isinstance(value, (tuple, list)):
        return [_plain(v) for v in value]
    if isinstance(value, float):
        return repr(value)
    if value is None or isinstance(value, (bool, int, str)):
        return value
    return repr(value)


def _stat(path: Path) -> list | None:
    try:
        st = os.stat(path)
    except OSError:
        return None
    return [str(path), st.st_size, st.st_mtime_ns]


def _source_stamp(source: Path) -> list | None:
    """(path, size, mtime_ns) of a source and of the sidecar files that change what it reads;
    None when the source cannot be stat'ed (the layer then reports its own error)."""
    main = _stat(Path(source))
    if main is None:
        return None
    side = [s for s in (_stat(Path(f"{source}{ext}")) for ext in (".ovr", "-wal")) if s]
    return [main] + side


def _code_stamp() -> list:
    """Size and mtime of the modules that paint (an edited module is a new cache)."""
    pkg = Path(__file__).resolve().parents[1]
    files = sorted([*(pkg / "layers").glob("*.py"), *(pkg / "sources").glob("*.py"),
                    pkg / "engine.py", pkg / "canvas.py", pkg / "ramps" / "lut.py"])
    return [CACHE_VERSION] + [s[1:] for s in map(_stat, files) if s]


def _canvas_key(canvas) -> list:
    return [str(canvas.crs), [repr(float(v)) for v in tuple(canvas.transform)[:6]],
            canvas.width, canvas.height, repr(float(canvas.dpi))]


def _lut_key(lut) -> list:
    """What decides a lookup table's indices (not its colours)."""
    def arr(a):
        a = np.asarray(a, dtype=float)
        return hashlib.sha256(a.tobytes()).hexdigest()[:16] + f"/{a.size}"
    return [lut.kind, arr(lut.values), arr(lut.edges), lut.stepped, lut.step_method,
            repr(lut.origin), repr(lut.width), repr(lut.split), lut.n]


def _digest(obj: Any) -> str:
    return hashlib.sha256(json.dumps(obj, sort_keys=True).encode()).hexdigest()[:40]


# --- colours ------------------------------------------------------------------------------------

def _lut_of(spec, ramps) -> Any | None:
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
        lut = _lut_of(spec, ramps)
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


# --- entries ------------------------------------------------------------------------------------

class _Slot:
    """The j-th paint of a layer's windows, on the canvas grid (core pixels only)."""

    def __init__(self, shape: tuple[int, int], indexed: bool):
        self.alpha8: np.ndarray | None = np.zeros(shape, np.uint8)
        self.alpha32: np.ndarray | None = None
        self.index = np.zeros(shape, np.uint16) if indexed else None

    def put(self, core, alpha: np.ndarray, index: np.ndarray | None) -> None:
        if self.alpha8 is not None:
            a8 = np.rint(alpha * np.float32(255)).astype(np.uint8)
            if np.array_equal(np.divide(a8, np.float32(255), dtype=np.float32), alpha):
                self.alpha8[core] = a8
            else:            # not 8-bit coverage: keep float32 from here on (exact either way)
                self.alpha32 = np.divide(self.alpha8, np.float32(255), dtype=np.float32)
                self.alpha8 = None
        if self.alpha32 is not None:
            self.alpha32[core] = alpha
        if self.index is not None and index is not None:
            self.index[core] = index


def _window_id(window) -> str:
    return f"{window.row},{window.col},{window.height},{window.width}"


class Recorder:
    """A real layer, passed through, whose paints are kept on the canvas grid for the cache."""

    def __init__(self, layer, key: str, colors: dict, canvas, extra: dict):
        self._layer = layer
        self._key = key
        self._colors = colors
        self._shape = (canvas.height, canvas.width)
        self._slots: list[_Slot] = []
        self._windows: dict[str, list[str]] = {}
        self._extra = extra
        self.ok = True

    def __getattr__(self, name: str) -> Any:
        return getattr(self._layer, name)

    def paint(self, window, transform, height, width) -> list[Paint]:
        paints = self._layer.paint(window, transform, height, width)
        if not self.ok:
            return paints
        inner, core = window.inner, window.core
        parts = []
        for j, p in enumerate(paints):
            if p.part not in self._colors or not _same_color(p, self._colors[p.part]):
                self.ok = False         # painted in a colour this cache cannot reproduce
                return paints
            if j == len(self._slots):
                self._slots.append(_Slot(self._shape, p.palette is not None))
            slot = self._slots[j]
            if (slot.index is None) != (p.palette is None):
                self.ok = False
                return paints
            slot.put(core, np.ascontiguousarray(p.alpha[inner]),
                     None if p.index is None else p.index[inner])
            parts.append(p.part)
        self._windows[_window_id(window)] = parts
        return paints

    def entry(self, margin: int, window_size: int) -> tuple[dict, dict[str, np.ndarray]] | None:
        """(meta, arrays) to store, or None when this layer cannot be cached."""
        if not self.ok or not self._windows:
            return None
        arrays: dict[str, np.ndarray] = {}
        for j, s in enumerate(self._slots):
            arrays[f"a{j}"] = s.alpha8 if s.alpha8 is not None else s.alpha32  # type: ignore
            if s.index is not None:
                arrays[f"i{j}"] = s.index
        meta = {"version": CACHE_VERSION, "key": self._key, "margin": int(self._layer.margin),
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


#: First bytes of an entry file: the format's name and version.
MAGIC = b"compose check cache 1\n"


class _Arrays:
    """An entry's arrays, decompressed (all of them, when the entry is read: a damaged one
    then makes the whole entry a miss instead of failing half-way through the walk)."""

    def __init__(self, blob: memoryview, table: dict, shape: list):
        from zlib_ng import zlib_ng

        self._arrays: dict[str, np.ndarray] = {}
        for name, (dtype, dims, start, length, *how) in table.items():
            if list(dims) != list(shape):
                raise ValueError(f"array {name} is not of the canvas's shape")
            raw: bytes | memoryview
            if how and how[0] == "raw":      # stored as it is: its CRC-32 says it is whole
                raw = blob[start:start + length]
                if len(how) != 2 or zlib_ng.crc32(raw) != how[1]:
                    raise ValueError(f"array {name} is damaged")
            else:                               # deflate streams carry their own checksum
                raw = zlib_ng.decompress(blob[start:start + length])
            self._arrays[name] = np.frombuffer(raw, dtype=np.dtype(dtype)).reshape(dims)
        self.files = list(self._arrays)

    def __getitem__(self, name: str) -> np.ndarray:
        return self._arrays[name]

    def close(self) -> None:
        self._arrays = {}


def _load(path: Path) -> tuple[dict, _Arrays] | None:
    """An entry's (meta, arrays), or None when missing, unreadable or damaged in any way (the
    entry is then rebuilt)."""
    try:
        with open(path, "rb") as f:
            data = f.read()
    except OSError:
        return None
    try:
        if not data.startswith(MAGIC):
            raise ValueError("not an entry")
        at = len(MAGIC)
        n = int.from_bytes(data[at:at + 8], "little")
        head = json.loads(data[at + 8:at + 8 + n].decode())
        meta, table = head["meta"], head["arrays"]
        if meta.get("version") != CACHE_VERSION:
            raise ValueError("old entry")
        arrays = _Arrays(memoryview(data)[at + 8 + n:], table, meta["shape"])
        if any(f"a{j}" not in arrays.files for j in range(int(meta["slots"]))):
            raise ValueError("an array is missing")
        return meta, arrays
    except Exception:               # noqa: BLE001 -- any damage: ignore the entry, rebuild it
        return None


def _save(path: Path, meta: dict, arrays: dict[str, np.ndarray]) -> None:
    """Write an entry atomically (a temporary file in the same folder, then renamed): the
    format's name, the header's length (8 bytes, little-endian), the JSON header (meta, and per
    array its dtype, shape and place), then each array deflated (zlib-ng, level 1) -- or as it
    is when a sample of it deflates to more than :data:`RAW_RATIO` of its size."""
    from zlib_ng import zlib_ng

    blobs, table, at = [], {}, 0
    for name, arr in arrays.items():
        arr = np.ascontiguousarray(arr)
        data = arr.tobytes()
        sample = data[:SAMPLE_BYTES]
        if len(data) > 2 * SAMPLE_BYTES and \
                len(zlib_ng.compress(sample, 1)) > RAW_RATIO * len(sample):
            blob, how = data, ["raw", zlib_ng.crc32(data)]  # noisy indices: deflate saves little
        else:
            blob, how = zlib_ng.compress(data, 1), []
        table[name] = [arr.dtype.str, list(arr.shape), at, len(blob), *how]
        blobs.append(blob)
        at += len(blob)
    head = json.dumps({"meta": meta, "arrays": table}).encode()
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".entry-", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as f:
            f.write(MAGIC + len(head).to_bytes(8, "little") + head)
            for blob in blobs:
                f.write(blob)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


# --- the cache of one check ---------------------------------------------------------------------

class CheckCache:
    """The cache as one check uses it: :meth:`layer` is :func:`compose.engine.prepare`'s
    ``make_layer`` hook (a :class:`CachedLayer` on a hit, else the real layer recorded);
    :meth:`usable` says whether the hits fit the walk; :meth:`save` stores the misses after it.
    ``read``: use existing entries (False: rebuild and overwrite them)."""

    def __init__(self, root: Path, style, canvas, keep_clear: Callable | None, read: bool = True):
        self.root = root
        self.folder = root / _SUBDIR
        self.style = style
        self.canvas = canvas
        self.read = read
        self.enabled = canvas.width * canvas.height <= MAX_PIXELS
        self._base = [_code_stamp(), _canvas_key(canvas), _canvas_key(style.canvas())]
        self._furniture = self._furniture_key(keep_clear)
        self._labels_before: list[str] = []
        self.hits: list[CachedLayer] = []
        self.recorders: list[Recorder] = []
        self.uncached = 0           # layers this cache does not keep (built every time)

    def _furniture_key(self, keep_clear) -> Any:
        """What decides the boxes labels keep clear of (see :func:`compose.page.write.blocked_for`:
        none without a page or with all furniture in the panel or off)."""
        page = getattr(self.style, "page", None)
        if keep_clear is None or page is None:
            return None
        inside = [page.legend, page.north, page.scalebar.place]
        if all(p in ("panel", "off") for p in inside):
            return None
        return _digest([_plain(page),
                        [[s.name, s.role, s.kind, str(s.source),
                          _plain(s.options, skip=COLOR_ONLY.get(s.kind, frozenset()))]
                         for s in self.style.layers],
                        {k: _plain(dict(t.table)) for k, t in self.style.ramps.items()}])

    def key(self, spec, ctx) -> tuple[str | None, dict | None]:
        """(key, part colours) of a layer, or (None, None) when it is not cached."""
        colors = layer_colors(spec, ctx.ramps)
        stamp = _source_stamp(spec.source) if colors is not None else None
        if colors is None or stamp is None:
            return None, None
        parts: list[Any] = [self._base, spec.kind, stamp,
                            _plain(spec.options, skip=COLOR_ONLY.get(spec.kind, frozenset()))]
        if spec.kind in ("field", "classes"):
            lut = _lut_of(spec, ctx.ramps)
            parts.append(_lut_key(lut))
        if spec.kind == "labels":
            parts += [self._furniture, list(self._labels_before)]
        return _digest(parts), colors

    def layer(self, spec, ctx, build: Callable[[], Any]) -> Any:
        key, colors = self.key(spec, ctx) if self.enabled else (None, None)
        if key is None or colors is None:
            self.uncached += 1
            return build()
        if spec.kind == "labels":
            self._labels_before.append(key)
        path = self.folder / f"{key}.entry"
        found = _load(path) if self.read else None
        if found is not None:
            with contextlib.suppress(OSError):
                os.utime(path)                      # used now (the least recently used go)
            meta, arrays = found
            hit = CachedLayer(spec, meta, arrays, colors, ctx.ramps)
            if spec.kind == "labels":
                ctx.label_boxes.extend(tuple(b) for b in meta.get("label_boxes", []))
            self.hits.append(hit)
            return hit
        before = len(ctx.label_boxes)
        layer = build()
        extra: dict[str, Any] = {"shape": [self.canvas.height, self.canvas.width]}
        if spec.kind == "labels":
            extra["label_boxes"] = [[float(v) for v in b] for b in ctx.label_boxes[before:]]
            extra["unplaced"] = [str(u) for u in getattr(layer, "unplaced", [])]
        rec = Recorder(layer, key, colors, self.canvas, extra)
        self.recorders.append(rec)
        return rec

    @property
    def warm(self) -> bool:
        """Every layer of the check replayed from the cache (nothing read or drawn)."""
        return bool(self.hits) and not self.recorders and not self.uncached

    def usable(self, margin: int, window_size: int) -> bool:
        """Whether every hit was recorded on the same walk (windows and their margin)."""
        return all(h.meta.get("walk") == [int(margin), int(window_size)] for h in self.hits)

    def save(self, margin: int, window_size: int) -> int:
        """Store the recorded layers' entries (errors writing are ignored: a cache is optional);
        returns how many were written."""
        n = 0
        for rec in self.recorders:
            made = rec.entry(margin, window_size)
            if made is None:
                continue
            try:
                _save(self.folder / f"{rec._key}.entry", *made)
                n += 1
            except OSError:
                pass
        if n:
            trim_cache(self.folder)
        return n


def trim_cache(folder: Path, max_bytes: int = MAX_BYTES) -> int:
    """Delete the least recently used entries until ``folder`` holds at most ``max_bytes``;
    returns how many were deleted."""
    entries = []
    for path in folder.glob("*.entry"):
        with contextlib.suppress(OSError):
            st = path.stat()
            entries.append((st.st_mtime_ns, st.st_size, path))
    total = sum(size for _, size, _ in entries)
    gone = 0
    for _, size, path in sorted(entries):
        if total <= max_bytes:
            break
        with contextlib.suppress(OSError):
            path.unlink()
            total -= size
            gone += 1
    return gone
