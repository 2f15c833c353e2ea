"""``compose tiles``: a Web Mercator tile pyramid rendered by the same engine, zoom by zoom.

Each zoom gets its own canvas in EPSG:3857 at that zoom's resolution (relief is shaded, lines
drawn and labels placed at that resolution, never shrunk from a deeper zoom); the engine walks it
in windows of exactly one tile, and :class:`TileSink` cuts each band of rows into tiles. Tiles
that do not meet the style's extent are not written; pixels outside the extent are transparent.
The check judges what the tiles show: for each zoom, the style's own extent in its own CRS at
that zoom's ground resolution and the tiles' dpi (:func:`check_canvas`; pixels outside the
extent are transparent in the tiles and are not judged), and the statistics of every zoom add up
to one check report for the whole set.
"""
from __future__ import annotations

import json
import time
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from compose.tiles.grid import CRS, TILE, tile_range, tile_span, zoom_canvas

__all__ = ["TileSink", "TileResult", "render_tiles", "extent_3857", "WEB_DPI"]

#: Dots per inch of tiles: the CSS reference pixel (1/96 inch), so 1 pt = 4/3 px on screen.
WEB_DPI = 96.0


def extent_3857(style):
    """The style's map extent as a shapely polygon in EPSG:3857 (edges densified)."""
    import shapely
    from pyproj import Transformer

    west, south, east, north = style.canvas().bounds
    t = np.linspace(0, 1, 65)
    xs = np.concatenate([west + (east - west) * t, np.full(65, east), east - (east - west) * t,
                         np.full(65, west)])
    ys = np.concatenate([np.full(65, south), south + (north - south) * t, np.full(65, north),
                         north - (north - south) * t])
    tr = Transformer.from_crs(style.canvas().crs, CRS, always_xy=True)
    mx, my = tr.transform(xs, ys)
    return shapely.Polygon(np.column_stack([mx, my]))


def check_canvas(style, z: int, dpi: float = 0.0):
    """The canvas the check of zoom ``z`` walks: the style's own extent and CRS, its pixel the
    ground size of a tile pixel at the extent's centre (Web Mercator's scale there, as the
    tiles' map shows it), at most the extent's shorter side; the tiles' ``dpi``."""
    from pyproj import Transformer

    from compose.canvas import Canvas

    own = style.canvas()
    west, south, east, north = own.bounds
    cx, cy = (west + east) / 2, (south + north) / 2
    to_web = Transformer.from_crs(own.crs, CRS, always_xy=True)
    back = Transformer.from_crs(CRS, own.crs, always_xy=True)
    mx, my = to_web.transform(cx, cy)
    px = tile_span(z) / TILE
    xs, ys = back.transform([mx, mx + px, mx], [my, my, my + px])
    # the area of one tile pixel in the map's units, as a square's side
    side = abs((xs[1] - xs[0]) * (ys[2] - ys[0]) - (xs[2] - xs[0]) * (ys[1] - ys[0])) ** 0.5
    side = min(side, east - west, north - south)
    return Canvas.from_extent(own.crs, (west, south, east, north), side, dpi=dpi or WEB_DPI)


class TileSink:
    """Cuts bands of canvas rows into ``TILE``-pixel tiles and writes those meeting the data as
    RGBA PNGs ``out/z/x/y.png`` (alpha 0 outside the style's extent)."""

    def __init__(self, out: Path, z: int, tiles: tuple[int, int, int, int], canvas, footprint):
        from rasterio.features import geometry_mask

        self.out, self.z, self.tiles, self.canvas = Path(out), z, tiles, canvas
        self.inside = ~geometry_mask([footprint], out_shape=(canvas.height, canvas.width),
                                     transform=canvas.transform, all_touched=False)
        self.written: list[tuple[int, int, int]] = []

    def rows(self, row0: int, rgb8: np.ndarray) -> None:
        from compose.output.png import PngWriter

        x0, y0, _, _ = self.tiles
        ty = y0 + row0 // TILE
        for i in range(rgb8.shape[1] // TILE):
            cols = slice(i * TILE, (i + 1) * TILE)
            alpha = self.inside[row0:row0 + rgb8.shape[0], cols]
            if not alpha.any():
                continue                      # outside the data: not written
            rgba = np.empty((rgb8.shape[0], TILE, 4), np.uint8)
            rgba[..., :3] = rgb8[:, cols]
            rgba[..., 3] = np.where(alpha, 255, 0)
            path = self.out / str(self.z) / str(x0 + i) / f"{ty}.png"
            path.parent.mkdir(parents=True, exist_ok=True)
            tmp = path.with_name(f".{path.name}.tmp")
            writer = PngWriter(tmp, TILE, rgba.shape[0], 4, dpi=WEB_DPI, level=6)
            writer.write_rows(rgba)
            writer.close()
            tmp.replace(path)
            self.written.append((self.z, x0 + i, ty))


@dataclass
class TileResult:
    """What ``render_tiles`` wrote: tiles per zoom, the viewer, the report and timings."""

    out: Path
    tiles: dict[int, int]
    viewer: Path
    report: object
    seconds: dict[str, float] = field(default_factory=dict)


def render_tiles(style, out: Path, zooms: list[int], *, dpi: float = WEB_DPI,
                 progress=None) -> TileResult:
    """Render ``style`` as tiles at ``zooms`` into ``out``; write the viewer and the check."""
    from compose.check import check_style
    from compose.check.stats import Statistics
    from compose.engine import prepare, run
    from compose.limits import check_canvas_size
    from compose.output.atomic import atomic_path
    from compose.tiles.viewer import viewer_html

    out = Path(out)
    footprint = extent_3857(style)
    plan = []
    for z in zooms:
        tiles = tile_range(z, footprint.bounds)
        canvas = zoom_canvas(z, tiles, dpi)
        check_canvas_size(canvas.width, canvas.height, where=f"--zoom {z}")
        plan.append((z, tiles, canvas))
    t0 = time.perf_counter()
    merged: Statistics | None = None
    counts: dict[int, int] = {}
    present: dict[int, list[str]] = {}
    ramps = None
    for z, tiles, canvas in plan:
        run_ = prepare(style, ramps=ramps, canvas=canvas)
        ramps = run_.ramps
        try:
            sink = TileSink(out, z, tiles, canvas, footprint)
            run(run_, [sink], window=TILE, progress=progress, measure=False)
        finally:
            run_.close()
        counts[z] = len(sink.written)
        present[z] = [f"{x}/{y}" for _, x, y in sink.written]
        checked = prepare(style, ramps=ramps, canvas=check_canvas(style, z, dpi))
        try:
            stats = run(checked, [])
        finally:
            checked.close()
        if stats is not None:       # the same layers at another zoom: added up, canvases too
            merged = stats if merged is None else merged.add_canvas(stats)
    report = check_style(style, merged, ramps) if merged is not None else None
    if report is not None:
        with atomic_path(out / "check.json") as tmp:
            tmp.write_text(json.dumps(report.to_json(), indent=2))
    viewer = out / "index.html"
    with atomic_path(viewer) as tmp:
        tmp.write_text(viewer_html(style, footprint.bounds, zooms, counts, present),
                       encoding="utf-8")
    return TileResult(out, counts, viewer, report, {"total": time.perf_counter() - t0})

