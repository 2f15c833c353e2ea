"""Benchmark: a synthetic N x N render (relief + field + ~10,000 lines) against the numpy floor.

    python bench/render.py [--size 8192] [--lines 10000] [--repeat 1]

Prints, from the same run:
  * the numpy floor for the same pixel count: a lookup-table gather (uint16 index -> 3 float32
    planes) plus one composite pass, done in strips;
  * the render's compute time (read, shade, colour, composite, draw, measure) and the encode
    time (PNG + GeoTIFF), the whole render, the ratio compute / floor;
  * the cost of the hierarchy statistics (render with and without measuring);
  * peak memory (max RSS) against the canvas size x 16 bytes.
No assertion is made: the figures are for the closing notes and for regressions by eye.
"""
from __future__ import annotations

import argparse
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent


def make_data(folder: Path, size: int, n_lines: int) -> None:
    """Synthetic DEM, field and lines on an EPSG:32630 grid of size x size 30 m pixels."""
    import fiona
    import rasterio
    from affine import Affine

    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(7)
    transform = Affine(30, 0, 400000, 0, -30, 4600000)
    profile = dict(driver="GTiff", width=size, height=size, count=1, dtype="float32",
                   crs="EPSG:32630", transform=transform, tiled=True, blockxsize=512,
                   blockysize=512, compress="deflate", predictor=3, num_threads="all_cpus")
    y, x = np.mgrid[0:256, 0:256] / 256.0
    base = (np.sin(x * 9) * np.cos(y * 7) * 400 + rng.normal(0, 30, (256, 256))).astype("float32")
    with rasterio.open(folder / "dem.tif", "w", **profile, nodata=-9999) as dem, \
            rasterio.open(folder / "field.tif", "w", **profile, nodata=np.nan) as field:
        reps = (size + 255) // 256
        for r0 in range(0, size, 512):
            h = min(512, size - r0)
            tile = np.tile(base, (3, reps))[r0 % 256:r0 % 256 + h, :size] + 800
            dem.write(tile, 1, window=rasterio.windows.Window(0, r0, size, h))
            field.write(((tile - 300) / 100).astype("float32"), 1,
                        window=rasterio.windows.Window(0, r0, size, h))
    schema = {"geometry": "LineString", "properties": {"kind": "str"}}
    span = size * 30
    with fiona.open(folder / "lines.gpkg", "w", driver="GPKG", layer="lines", crs="EPSG:32630",
                    schema=schema) as dst:
        starts = rng.uniform(0, span, (n_lines, 2))
        steps = rng.normal(0, 300, (n_lines, 100, 2)).cumsum(axis=1)
        for i in range(n_lines):
            pts = starts[i] + steps[i]
            pts[:, 0] += 400000
            pts[:, 1] = 4600000 - pts[:, 1]
            dst.write({"geometry": {"type": "LineString", "coordinates": pts.tolist()},
                       "properties": {"kind": "road"}})


STYLE = """
[map]
name = "bench"
title = "benchmark"
crs = "EPSG:32630"
extent = [400000, {south}, {east}, 4600000]
pixel = 30
dpi = 150

[ramp.bench]
kind = "sequential"
domain = [0, 12]
through = [{{L = 92, C = 10, h = 95}}, {{L = 55, C = 40, h = 140}}, {{L = 25, C = 20, h = 160}}]

[[layer]]
name = "relief"
role = "ground"
kind = "relief"
source = "dem.tif"

[[layer]]
name = "field"
role = "theme"
kind = "field"
source = "field.tif"
ramp = "bench"
blend = "multiply"

[[layer]]
name = "lines"
role = "overlay"
kind = "lines"
source = "lines.gpkg"
stroke = "#3a3a3a"
width = 0.6
"""


def floor_seconds(folder: Path, size: int) -> dict[str, float]:
    """Each kernel of the render alone, on the same data, in the cheapest plain form:

    read   -- plain GDAL reads of the DEM and the field in strips (no warping);
    shade  -- Horn hillshade in row strips;
    colour -- lookup-table gather, uint16 index -> 3 float32 planes;
    blend  -- one composite pass per layer (3 layers);
    draw   -- every line drawn once by Agg, canvas cut into 2048 px tiles.
    """
    import fiona
    import rasterio
    import shapely
    from affine import Affine

    from compose.layers.draw import draw_lines
    from compose.layers.hillshade import hillshade

    out: dict[str, float] = {}
    strip = 256
    t0 = time.perf_counter()
    with rasterio.open(folder / "dem.tif") as a, rasterio.open(folder / "field.tif") as b:
        for r0 in range(0, size, strip):
            win = rasterio.windows.Window(0, r0, size, min(strip, size - r0))
            dem = a.read(1, window=win)
            b.read(1, window=win)
    out["read"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    for _ in range(0, size, strip):
        hillshade(dem, 30.0, 30.0)
    out["shade"] = time.perf_counter() - t0
    rng = np.random.default_rng(1)
    table = rng.random((3, 1027), dtype=np.float32)
    index = rng.integers(0, 1024, (strip, size)).astype(np.uint16)
    alpha = rng.random((strip, size), dtype=np.float32)
    back = rng.random((3, strip, size), dtype=np.float32)
    src = np.empty_like(back)
    t0 = time.perf_counter()
    for _ in range(0, size, strip):
        for c in range(3):
            np.take(table[c], index, out=src[c])
    out["color"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    for _ in range(0, size, strip):
        for _layer in range(3):
            src -= back          # back + alpha * (src - back)
            src *= alpha
            back += src
    out["blend"] = time.perf_counter() - t0
    with fiona.open(folder / "lines.gpkg") as c:
        geoms = np.array([shapely.geometry.shape(f["geometry"]) for f in c], dtype=object)
    tree = shapely.STRtree(geoms)
    tile = 2048
    t0 = time.perf_counter()
    for r0 in range(0, size, tile):
        for c0 in range(0, size, tile):
            t = Affine(30, 0, 400000 + c0 * 30, 0, -30, 4600000 - r0 * 30)
            box = shapely.box(t.c, t.f - tile * 30, t.c + tile * 30, t.f)
            hits = geoms[tree.query(box)]
            draw_lines(hits, t, tile, tile, width_px=0.6 * 150 / 72)
    out["draw"] = time.perf_counter() - t0
    return out


def encode_floor_seconds(folder: Path, size: int) -> dict[str, float]:
    """A plain GDAL write (deflate, tiled, all cores) and a zlib-level-6 PNG-like deflate of the
    same RGB pixel count -- what the encoders cannot beat by much."""
    import zlib

    import rasterio
    from affine import Affine

    rng = np.random.default_rng(2)
    strip = 512
    block = (rng.integers(0, 32, (strip, size, 3)) + 100).astype(np.uint8)
    path = folder / "floor.tif"
    t0 = time.perf_counter()
    with rasterio.open(path, "w", driver="GTiff", width=size, height=size, count=3, dtype="uint8",
                       crs="EPSG:32630", transform=Affine(30, 0, 0, 0, -30, 0), tiled=True,
                       blockxsize=512, blockysize=512, compress="deflate", predictor=2,
                       num_threads="all_cpus") as ds:
        data = np.moveaxis(block, -1, 0)
        for r0 in range(0, size, strip):
            ds.write(data, window=rasterio.windows.Window(0, r0, size, strip))
    gdal = time.perf_counter() - t0
    path.unlink()
    z = zlib.compressobj(6)
    t0 = time.perf_counter()
    raw = block.tobytes()
    for _ in range(0, size, strip):
        z.compress(raw)
    z.flush()
    return {"geotiff": gdal, "png": time.perf_counter() - t0}


def render_once(folder: Path, out: Path, measure: bool) -> dict:
    from compose.engine import prepare, run
    from compose.render import render_style
    from compose.style import load_style

    style = load_style(folder / "style.toml")
    if measure is not None:   # compute only, no sinks: with or without the statistics
        r = prepare(style)
        try:
            t0 = time.perf_counter()
            run(r, [], measure=measure)
            return {"compute": time.perf_counter() - t0}
        finally:
            r.close()
    t0 = time.perf_counter()
    res = render_style(style, out, overwrite=True, legend=False, check=True, html=False)
    total = time.perf_counter() - t0
    return {"total": total, **res.seconds}


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--size", type=int, default=8192)
    ap.add_argument("--lines", type=int, default=10000)
    ap.add_argument("--data", type=Path, default=Path(tempfile.gettempdir()) / "compose-bench")
    ap.add_argument("--keep", action="store_true", help="keep the synthetic data for the next run")
    args = ap.parse_args()
    folder = args.data / f"{args.size}-{args.lines}"
    if not (folder / "lines.gpkg").exists():
        print(f"making synthetic data in {folder} ...", flush=True)
        subprocess.run([sys.executable, __file__, "--make", str(folder), str(args.size), str(args.lines)],
                       check=True)
    span = args.size * 30
    (folder / "style.toml").write_text(STYLE.format(south=4600000 - span, east=400000 + span))
    mpx = args.size * args.size / 1e6
    kernels = floor_seconds(folder, args.size)
    floor = sum(kernels.values())
    enc_floor = encode_floor_seconds(folder, args.size)
    out = folder / "out"
    plain = min(render_once(folder, out, measure=False)["compute"] for _ in range(2))
    measured = min(render_once(folder, out, measure=True)["compute"] for _ in range(2))
    full = render_once(folder, out, measure=None)
    compute = full["compute"] + full["prepare"]
    encode = full["encode"] + full.get("finish-encode", 0.0)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    canvas_bytes = args.size * args.size * 16
    print(f"canvas                 {args.size} x {args.size} ({mpx:.0f} Mpixel), {args.lines} lines")
    print("compute floor          " + ", ".join(f"{k} {v:.2f}" for k, v in kernels.items())
          + f"  = {floor:.2f} s")
    print(f"compute, no measuring  {plain:6.2f} s  ({plain / floor:.1f} x floor)")
    print(f"compute with measuring {measured:6.2f} s  ({measured / floor:.1f} x floor; target <= 3 x)")
    print(f"check overhead         {100 * (measured - plain) / plain:6.1f} %  (statistics on compute; "
          "target <= 10-15 %)")
    print(f"in the full render     {compute:6.2f} s compute (prepare included; GDAL's compression "
          "threads share the cores)")
    ef = sum(enc_floor.values())
    print(f"encode (PNG + GeoTIFF) {encode:6.2f} s  (floor: GDAL {enc_floor['geotiff']:.2f} s + zlib "
          f"{enc_floor['png']:.2f} s = {ef:.2f} s; {encode / ef:.2f} x, target <= 1.3 x)")
    print(f"whole render           {full['total']:6.2f} s")
    print(f"peak memory            {peak / 1e9:6.2f} GB  (canvas x 16 bytes = {canvas_bytes / 1e9:.2f} GB)")
    if not args.keep:
        shutil.rmtree(out, ignore_errors=True)


if __name__ == "__main__":
    if len(sys.argv) == 5 and sys.argv[1] == "--make":
        make_data(Path(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4]))
    else:
        os.environ.setdefault("GDAL_CACHEMAX", "256")
        main()
