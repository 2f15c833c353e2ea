"""Tiny real maps for the checker tests: GeoTIFFs and GeoPackages written with rasterio and fiona
into a folder, styles written as TOML from Python dicts, and the fixes of a report applied back.

Canvas: 64 x 64 pixels of 30 m (EPSG:32631), dpi 72 so that 1 pt = 1 px.
"""
from __future__ import annotations

import copy
import re
from pathlib import Path

import fiona
import numpy as np
import rasterio
from affine import Affine

CRS = "EPSG:32631"
N = 64
WEST, NORTH = 500000.0, 4001920.0
TRANSFORM = Affine(30.0, 0.0, WEST, 0.0, -30.0, NORTH)
EXTENT = [WEST, NORTH - 30 * N, WEST + 30 * N, NORTH]


def _raster(path: Path, data: np.ndarray, nodata=None) -> Path:
    with rasterio.open(path, "w", driver="GTiff", height=data.shape[0], width=data.shape[1],
                       count=1, dtype=data.dtype, crs=CRS, transform=TRANSFORM, nodata=nodata) as ds:
        ds.write(data, 1)
    return path


def _vector(path: Path, geometry: str, features: list, properties: dict) -> Path:
    schema = {"geometry": geometry, "properties": properties}
    with fiona.open(path, "w", driver="GPKG", layer=path.stem, crs=CRS, schema=schema) as dst:
        for geom, props in features:
            dst.write({"geometry": geom, "properties": props})
    return path


def xy(col: float, row: float) -> tuple[float, float]:
    """CRS coordinates of a (fractional) pixel position."""
    return (WEST + 30.0 * col, NORTH - 30.0 * row)


def make_data(folder: Path) -> dict[str, Path]:
    """Write every source the tests use; returns name -> path."""
    folder.mkdir(parents=True, exist_ok=True)
    yy, xx = np.mgrid[0:N, 0:N].astype(np.float32)
    paths = {}
    paths["hills"] = _raster(folder / "hills.tif",
                             (300 + 120 * np.sin(xx / 6.0) * np.cos(yy / 5.0)).astype(np.float32))
    paths["flat"] = _raster(folder / "flat.tif", np.full((N, N), 100.0, np.float32))
    # gentle terrain: 4 m of relief over ~600 m (slopes < 2 degrees), plainly shown only when
    # the shading is normalised by the DEM's own slopes
    paths["gentle"] = _raster(folder / "gentle.tif",
                              (50 + 2 * np.sin(xx / 9.0) * np.cos(yy / 7.0)).astype(np.float32))
    ramp = (xx / (N - 1) * 10).astype(np.float32)
    ramp[:6, :6] = np.nan                       # a corner of no-data
    paths["gradient"] = _raster(folder / "gradient.tif", ramp, nodata=np.nan)
    # the same values (0 at the top row .. 10 at the bottom) in the west and in the east half,
    # no-data in the other half: twin layers drawn side by side
    rows = (yy / (N - 1) * 10).astype(np.float32)
    paths["west"] = _raster(folder / "west.tif", np.where(xx < N / 2, rows, np.nan).astype(np.float32),
                            nodata=np.nan)
    paths["east"] = _raster(folder / "east.tif", np.where(xx >= N / 2, rows, np.nan).astype(np.float32),
                            nodata=np.nan)
    # values 0..10 scattered over the canvas (a fixed permutation): every value lies on many
    # slopes, as a real field's values do; and the same split into a west and an east half
    scatter = np.random.default_rng(7).permutation(rows.ravel()).reshape(N, N)
    paths["scatter"] = _raster(folder / "scatter.tif", scatter.astype(np.float32), nodata=np.nan)
    paths["scatter_west"] = _raster(folder / "scatter_west.tif",
                                    np.where(xx < N / 2, scatter, np.nan).astype(np.float32),
                                    nodata=np.nan)
    paths["scatter_east"] = _raster(folder / "scatter_east.tif",
                                    np.where(xx >= N / 2, scatter, np.nan).astype(np.float32),
                                    nodata=np.nan)
    halves = np.where(xx < N / 2, 0.0, 10.0).astype(np.float32)
    paths["halves"] = _raster(folder / "halves.tif", halves, nodata=-9999.0)
    paths["classes"] = _raster(folder / "classes.tif", (1 + (xx // 16)).astype(np.uint8), nodata=0)
    # a horizontal line through rows 20 and 44 (pixel centres), edge to edge
    lines = [({"type": "LineString", "coordinates": [xy(0, r), xy(N, r)]}, {"name": f"l{r}"})
             for r in (20.5, 44.5)]
    paths["coast"] = _vector(folder / "coast.gpkg", "LineString", lines, {"name": "str"})
    towns = [({"type": "Point", "coordinates": xy(c, r)}, {"name": n, "pop": p})
             for c, r, n, p in ((10, 30, "Alpha", 3), (34, 12, "Beta", 2), (30, 50, "Gamma", 1))]
    paths["towns"] = _vector(folder / "towns.gpkg", "Point", towns, {"name": "str", "pop": "int"})
    return paths


# --- styles as dicts --------------------------------------------------------------------------

def base_map(**kw) -> dict:
    m = {"crs": CRS, "extent": EXTENT, "pixel": 30, "dpi": 72}
    m.update(kw)
    return m


def relief(src, **kw) -> dict:
    layer = {"name": "relief", "role": "ground", "kind": "relief", "source": str(src)}
    layer.update(kw)
    return layer


def field(src, ramp="land", name="val", **kw) -> dict:
    layer = {"name": name, "role": "theme", "kind": "field", "source": str(src), "ramp": ramp}
    layer.update(kw)
    return layer


def lines(src, name="coast", **kw) -> dict:
    layer = {"name": name, "role": "overlay", "kind": "lines", "source": str(src)}
    layer.update(kw)
    return layer


def labels(src, name="towns", **kw) -> dict:
    layer = {"name": name, "role": "overlay", "kind": "labels", "source": str(src), "text": "name"}
    layer.update(kw)
    return layer


LAND = {"kind": "sequential", "domain": [0, 10],
        "through": [{"L": 90, "C": 25, "h": 95}, {"L": 60, "C": 45, "h": 130},
                    {"L": 35, "C": 35, "h": 150}]}


def style(layers: list, ramps: dict | None = None, budget: dict | None = None,
          map_: dict | None = None) -> dict:
    out = {"map": map_ or base_map(), "ramp": copy.deepcopy(ramps if ramps is not None else
                                                            {"land": LAND}),
           "layer": layers}
    if budget:
        out["budget"] = budget
    return out


# --- a small TOML writer (tomllib reads only) --------------------------------------------------

def _value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(float(v)) if isinstance(v, float) else str(v)
    if isinstance(v, str):
        return '"' + v.replace("\\", "\\\\").replace('"', '\\"') + '"'
    if isinstance(v, dict):
        return "{ " + ", ".join(f"{k} = {_value(x)}" for k, x in v.items()) + " }"
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    raise TypeError(v)


def to_toml(doc: dict) -> str:
    lines_ = []
    for key in ("map",):
        lines_.append(f"[{key}]")
        lines_ += [f"{k} = {_value(v)}" for k, v in doc[key].items()]
    for role, table in doc.get("budget", {}).items():
        lines_.append(f"[budget.{role}]")
        lines_ += [f"{k} = {_value(v)}" for k, v in table.items()]
    for name, table in doc.get("ramp", {}).items():
        lines_.append(f"[ramp.{name}]")
        lines_ += [f"{k} = {_value(v)}" for k, v in table.items()]
    for layer in doc.get("layer", []):
        lines_.append("[[layer]]")
        lines_ += [f"{k} = {_value(v)}" for k, v in layer.items()]
    for waive in doc.get("waive", []):
        lines_.append("[[waive]]")
        lines_ += [f"{k} = {_value(v)}" for k, v in waive.items()]
    return "\n".join(lines_) + "\n"


def write_style(folder: Path, doc: dict, name: str = "map") -> Path:
    path = Path(folder) / f"{name}.toml"
    path.write_text(to_toml(doc), encoding="utf-8")
    return path


_TABLE = re.compile(r'^(layer|ramp) "([^"]+)"(?:\.(\w+)\[(\d+)\])?$')


def apply_change(doc: dict, change) -> dict:
    """A copy of ``doc`` with a report's :class:`Change` applied (table path + key values)."""
    doc = copy.deepcopy(doc)
    m = _TABLE.match(change.table)
    assert m, change.table
    kind, name, listkey, index = m.groups()
    if kind == "layer":
        target = next(t for t in doc["layer"] if t["name"] == name)
    else:
        target = doc["ramp"][name]
    if listkey is not None:
        target = target[listkey][int(index)]
    for key, value in copy.deepcopy(change.values).items():
        *tables, last = key.split(".")          # "shade.exaggeration" -> shade = { ... }
        t = target
        for name in tables:
            t = t.setdefault(name, {})
        t[last] = value
    return doc


def check(folder: Path, doc: dict, name: str = "map"):
    """Render ``doc`` in memory and check it -> Report."""
    from compose.api import check as check_style_file
    return check_style_file(write_style(folder, doc, name))
