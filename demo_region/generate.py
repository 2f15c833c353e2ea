"""Generate the invented demo region for compose: seeded, deterministic, writes next to itself.

Run as ``.venv/bin/python demo_region/generate.py`` from anywhere. Everything produced is
invented: no real place, no real data. Dev script: it uses scipy, which compose itself does
not need. See README.md in this folder for how each layer is made.
"""

from __future__ import annotations

import sys
from pathlib import Path

import fiona
import numpy as np
import rasterio
from rasterio import features
from rasterio.crs import CRS
from rasterio.transform import from_origin
from rasterio.warp import Resampling, calculate_default_transform, reproject
from scipy import ndimage
from shapely.geometry import LineString, MultiPolygon, Point, mapping
from shapely.ops import linemerge

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

import _hydro  # noqa: E402
import _terrain as terrain  # noqa: E402
import _themes as themes  # noqa: E402
import _vectors as vectors  # noqa: E402
from _names import invent_names  # noqa: E402
from _noise import rng_for, spectral_noise  # noqa: E402

SEED = 7
EPSG = 32630                     # WGS 84 / UTM zone 30N
WEST, NORTH = 480_000.0, 5_025_000.0
CELL, N, COARSE = 30.0, 1500, 4  # fine grid 1500 x 1500 at 30 m; coarse grid 375 x 375 at 120 m
TRANSFORM = from_origin(WEST, NORTH, CELL, CELL)
CARVE = np.array([0.0, 1.5, 2.5, 4.0, 6.0, 8.0, 10.0, 10.0, 10.0])   # channel depth (m) by order


def block(a: np.ndarray, how: str = "mean") -> np.ndarray:
    """Fine grid -> coarse grid by COARSE x COARSE blocks."""
    b = a.reshape(N // COARSE, COARSE, N // COARSE, COARSE)
    return getattr(b, how)(axis=(1, 3))


def carve_rivers(z: np.ndarray, river_d: np.ndarray, order: np.ndarray, land: np.ndarray):
    """Cut a channel of Gaussian cross-section along every river; land stays >= 0.25 m."""
    depth = CARVE[np.minimum(order, len(CARVE) - 1)]
    width = 15.0 + 12.0 * order
    cut = depth * np.exp(-((river_d / width) ** 2))
    carved = np.maximum(z - cut, np.minimum(z, 0.25))
    return np.where(land, carved, z)


def make_warp(z: np.ndarray):
    """Smooth displacement of map points: up to ~100 m on flat ground, ~15 m in steep valleys."""
    wx = spectral_noise(rng_for(SEED, 35), z.shape, CELL, 3.0, 2500.0, 300.0)
    wy = spectral_noise(rng_for(SEED, 36), z.shape, CELL, 3.0, 2500.0, 300.0)
    flat = np.exp(-terrain.local_slope(ndimage.gaussian_filter(z, 4.0), CELL) / 0.015)
    amp = ndimage.gaussian_filter(15.0 + 85.0 * flat, 6.0)

    def warp(xy: np.ndarray) -> np.ndarray:
        rc = [(NORTH - xy[:, 1]) / CELL - 0.5, (xy[:, 0] - WEST) / CELL - 0.5]
        a = ndimage.map_coordinates(amp, rc, order=1, mode="nearest")
        dx = ndimage.map_coordinates(wx, rc, order=1, mode="nearest")
        dy = ndimage.map_coordinates(wy, rc, order=1, mode="nearest")
        return xy + np.column_stack([a * dx, a * dy])

    return warp


def main() -> None:
    grid = terrain.Grid(N, CELL)
    shore = terrain.make_shore(grid, SEED)
    water_c = block((~shore.land).astype(float)) > 0.5
    coarse = terrain.evolve(water_c, CELL * COARSE, SEED)
    z = terrain.make_elevation(grid, shore, coarse, SEED)
    water = ~shore.land

    def water_at(xy: np.ndarray) -> np.ndarray:
        col = np.clip(((xy[:, 0] - WEST) / CELL).astype(int), 0, N - 1)
        row = np.clip(((NORTH - xy[:, 1]) / CELL).astype(int), 0, N - 1)
        return water[row, col]

    taken: set[str] = set()
    rivers = _hydro.trace_rivers(coarse, WEST, NORTH, water_at, make_warp(z), rng_for(SEED, 30),
                                 taken)
    shapes = [(LineString(r.xy), r.order) for r in sorted(rivers, key=lambda r: r.order)]
    river_r = features.rasterize(shapes, out_shape=(N, N), transform=TRANSFORM, fill=0,
                                 all_touched=True, dtype="uint8")
    river_d, (ir, ic) = ndimage.distance_transform_edt(river_r == 0, return_indices=True)
    river_d *= CELL
    river_order = river_r[ir, ic].astype(int)
    z = carve_rivers(z, river_d, river_order, shore.land)
    z = np.round(z.astype(np.float32) * 16.0) / 16.0          # 1/16 m steps compress well
    coast_d = np.where(shore.land, ndimage.distance_transform_edt(shore.land),
                       ndimage.distance_transform_edt(~shore.land)) * CELL
    mouths = []
    for r in rivers:
        if r.mouth:
            x, y = r.xy[-1]
            mouths.append(((x - WEST) / CELL - 0.5, (NORTH - y) / CELL - 0.5, r.area_km2))

    # Towns and roads on the coarse grid.
    land_c = block(shore.land.astype(float), "min") > 0.5
    dry_c = ndimage.binary_erosion(land_c, iterations=1)
    elev_c = block(z.astype(float))
    slope_c = terrain.local_slope(elev_c, CELL * COARSE)
    mouth_img = np.ones((N // COARSE, N // COARSE), dtype=bool)
    for col, row, area in mouths:
        if area >= 20.0:
            mouth_img[int(row) // COARSE, int(col) // COARSE] = False
    mouth_d = ndimage.distance_transform_edt(mouth_img) * CELL * COARSE
    towns = vectors.place_towns(elev_c, slope_c, dry_c, block(river_d, "min"),
                                block(coast_d, "min"), mouth_d, WEST, NORTH, CELL * COARSE,
                                rng_for(SEED, 31), taken)
    river_c = block((river_r > 0).astype(float), "max")
    road_noise = spectral_noise(rng_for(SEED, 33), slope_c.shape, CELL * COARSE, 2.5, 3000.0, 300.0)
    roads = vectors.route_roads(towns, slope_c, land_c, river_c, road_noise, WEST, NORTH,
                                CELL * COARSE)

    # Themes.
    ctx = themes.Context(z.astype(float), shore.land, shore.lagoon, shore.spit, river_d,
                         river_order, coast_d, mouths,
                         [((t.x - WEST) / CELL - 0.5, (NORTH - t.y) / CELL - 0.5, t.population)
                          for t in towns], CELL, SEED)
    cover = themes.landcover(ctx)
    cloud = themes.clouds(ctx)
    land_p = themes.land_productivity(ctx, cover)
    water_p = themes.water_productivity(ctx)
    land_p[cloud] = np.nan
    water_p[cloud] = np.nan
    temp = themes.water_temperature(ctx)
    anom = themes.anomaly(ctx, cover)

    # Shoreline, land and province.
    coast = vectors.contour_zero(z, TRANSFORM)
    land_poly = vectors.land_polygons(coast, z, TRANSFORM)
    labels = _hydro.basins(coarse)
    keep = province_basins(labels)
    frame = vectors.survey_frame(WEST, NORTH - N * CELL, WEST + N * CELL, NORTH,
                                 rng_for(SEED, 34))
    prov = vectors.province(labels, keep, land_poly, from_origin(WEST, NORTH, CELL * COARSE,
                                                                 CELL * COARSE), frame)
    border = linemerge(prov.boundary.difference(land_poly.boundary.buffer(5.0)))

    write_rasters(z, land_p, water_p, temp, anom, cover)
    name = invent_names(rng_for(SEED, 32), 1, taken)[0]
    write_vectors(coast, land_poly, rivers, roads, prov, border, towns, name)
    write_lonlat(z)


def province_basins(labels: np.ndarray) -> np.ndarray:
    """Basin labels (outlet indices) of the province: outlets 11-35 km north of the south edge."""
    n = labels.shape[0]
    outlets = np.unique(labels[labels >= 0])
    y_out = (n - outlets // n - 0.5) * CELL * COARSE
    return outlets[(y_out > 11_000.0) & (y_out < 35_000.0)]


def _q(a: np.ndarray, step: float) -> np.ndarray:
    """Round to multiples of ``step`` (a power of two) as float32; NaN stays NaN."""
    return (np.round(a / step) * step).astype(np.float32)


def _tif(name: str, arr: np.ndarray, nodata: float, units: str, desc: str, **tags) -> None:
    path = HERE / name
    path.unlink(missing_ok=True)
    profile = dict(driver="GTiff", width=N, height=N, count=1, dtype=arr.dtype,
                   crs=CRS.from_epsg(EPSG), transform=TRANSFORM, nodata=nodata, tiled=True,
                   blockxsize=256, blockysize=256, compress="deflate", zlevel=9,
                   predictor=3 if arr.dtype.kind == "f" else 2)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(arr, 1)
        dst.set_band_description(1, desc)
        dst.units = (units,)
        dst.update_tags(generator="demo_region/generate.py", seed=str(SEED),
                        content="invented, not real data", **tags)


def write_rasters(z, land_p, water_p, temp, anom, cover) -> None:
    _tif("elevation.tif", z.astype(np.float32), -9999.0, "m",
         "elevation above sea level (sea is < 0)")
    _tif("land_productivity.tif", _q(land_p, 1 / 64), float("nan"), "g C m-2 day-1",
         "plant productivity on land")
    _tif("water_productivity.tif", _q(water_p, 1 / 64), float("nan"), "g C m-2 day-1",
         "plankton productivity in water")
    _tif("water_temperature.tif", _q(temp, 1 / 64), float("nan"), "degC",
         "water surface temperature", alert_threshold=str(themes.CORAL_ALERT))
    _tif("anomaly.tif", _q(anom, 1 / 64), float("nan"), "K",
         "land surface temperature, this season minus baseline")
    classes = {f"class_{k}": f"{lab} ({fam})" for k, (lab, fam) in themes.CLASSES.items()}
    _tif("landcover.tif", cover, 0, "class", "land cover class", **classes)


def _layer(path: Path, name: str, geom_type: str, props: dict, rows: list) -> None:
    schema = {"geometry": geom_type, "properties": props}
    with fiona.open(path, "w", driver="GPKG", layer=name, schema=schema,
                    crs=f"EPSG:{EPSG}") as dst:
        dst.writerecords({"geometry": mapping(g), "properties": p} for g, p in rows)


def write_vectors(coast, land_poly, rivers, roads, prov, border, towns, name: str) -> None:
    path = HERE / "vectors.gpkg"
    path.unlink(missing_ok=True)
    ext = (WEST, NORTH - N * CELL, WEST + N * CELL, NORTH)

    def on_edge(ln: LineString) -> bool:
        return any(abs(v - e) < 1e-6 for x, y in (ln.coords[0], ln.coords[-1])
                   for v, e in ((x, ext[0]), (y, ext[1]), (x, ext[2]), (y, ext[3])))

    coast_rows = [(ln.simplify(4.0), {"kind": "mainland" if on_edge(ln) else "island"})
                  for ln in sorted(coast, key=lambda g: -g.length)]
    _layer(path, "coast", "LineString", {"kind": "str"}, coast_rows)
    polys = list(getattr(land_poly, "geoms", [land_poly]))
    _layer(path, "land", "MultiPolygon", {"kind": "str"},
           [(MultiPolygon([p.simplify(4.0)]), {"kind": "mainland" if k == 0 else "island"})
            for k, p in enumerate(sorted(polys, key=lambda p: -p.area))])
    _layer(path, "rivers", "LineString", {"order": "int", "name": "str"},
           [(LineString(r.xy).simplify(4.0), {"order": r.order, "name": r.name})
            for r in sorted(rivers, key=lambda r: (-r.order, r.name, r.xy[0, 0], r.xy[0, 1]))])
    _layer(path, "roads", "LineString", {"class": "str"}, [(g, {"class": c}) for g, c in roads])
    _layer(path, "province", "Polygon", {"name": "str"}, [(prov, {"name": name})])
    lines = list(getattr(border, "geoms", [border]))
    _layer(path, "boundary", "LineString", {"name": "str"},
           [(ln, {"name": name}) for ln in lines])
    _layer(path, "towns", "Point", {"name": "str", "population": "int", "kind": "str"},
           [(Point(t.x, t.y), {"name": t.name, "population": t.population, "kind": t.kind})
            for t in towns])


def write_lonlat(z: np.ndarray) -> None:
    """A 300 x 300 copy of the elevation in EPSG:4326 (degrees), for cell-size tests."""
    src_crs, dst_crs = CRS.from_epsg(EPSG), CRS.from_epsg(4326)
    bounds = (WEST, NORTH - N * CELL, WEST + N * CELL, NORTH)
    tr, w, h = calculate_default_transform(src_crs, dst_crs, N, N, *bounds,
                                           dst_width=300, dst_height=300)
    out = np.full((h, w), -9999.0, dtype=np.float32)
    reproject(z.astype(np.float32), out, src_transform=TRANSFORM, src_crs=src_crs,
              src_nodata=-9999.0, dst_transform=tr, dst_crs=dst_crs, dst_nodata=-9999.0,
              resampling=Resampling.average)
    out = np.where(out == -9999.0, out, _q(out, 1 / 16))
    path = HERE / "elevation_lonlat.tif"
    path.unlink(missing_ok=True)
    profile = dict(driver="GTiff", width=w, height=h, count=1, dtype="float32", crs=dst_crs,
                   transform=tr, nodata=-9999.0, tiled=True, blockxsize=256, blockysize=256,
                   compress="deflate", zlevel=9, predictor=3)
    with rasterio.open(path, "w", **profile) as dst:
        dst.write(out, 1)
        dst.set_band_description(1, "elevation above sea level (sea is < 0)")
        dst.units = ("m",)
        dst.update_tags(generator="demo_region/generate.py", seed=str(SEED),
                        content="invented, not real data")


if __name__ == "__main__":
    main()
