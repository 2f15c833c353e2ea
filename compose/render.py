"""``compose render``: a style in, a georeferenced map and its companions out.

Writes NAME.png (sRGB), NAME.tif (RGBA GeoTIFF on the canvas grid), NAME.legend.png,
NAME.check.json and NAME.html (the self-contained proof page), each to a temporary name renamed
into place only when everything succeeded.
"""
from __future__ import annotations

import contextlib
import json
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

from compose.engine import prepare, run
from compose.errors import OutputError
from compose.output.atomic import atomic_path, check_writable
from compose.output.background import BackgroundSink
from compose.output.geotiff import GeoTiffWriter
from compose.output.png import PngWriter

__all__ = ["RenderResult", "render_style", "output_paths", "CAUTION"]

from compose.check.report import CAUTION  # noqa: E402  (one wording everywhere)


@dataclass
class RenderResult:
    """What a render produced: output paths, canvas size, timings, statistics and check report."""

    outputs: dict[str, Path]
    width: int
    height: int
    seconds: dict[str, float]
    statistics: object
    report: object | None = None
    unplaced_labels: dict[str, list[str]] = field(default_factory=dict)
    ramps: dict = field(default_factory=dict)


class _PngSink:
    def __init__(self, path: Path, width: int, height: int, dpi: float):
        self.writer = PngWriter(path, width, height, 3, dpi=dpi)

    def rows(self, row0, rgb8):
        self.writer.write_rows(rgb8)


class _TiffSink:
    def __init__(self, path: Path, canvas, tags):
        self.writer = GeoTiffWriter(path, canvas, tags=tags)

    def rows(self, row0, rgb8):
        self.writer.write(row0, 0, rgb8)


def output_paths(style, out_dir: Path) -> dict[str, Path]:
    """Where each output of ``style`` goes in ``out_dir``."""
    out_dir = Path(out_dir)
    name = style.name
    return {"png": out_dir / f"{name}.png", "tif": out_dir / f"{name}.tif",
            "legend": out_dir / f"{name}.legend.png", "check": out_dir / f"{name}.check.json",
            "html": out_dir / f"{name}.html"}


def render_style(style, out_dir: Path, *, overwrite: bool = False,
                 progress: Callable[[int, int], None] | None = None,
                 extra_sinks: list | None = None, legend: bool = True, check: bool = True,
                 html: bool = True) -> RenderResult:
    """Render ``style`` into ``out_dir``; nothing is left half-written if anything fails.

    ``html``: also write the proof page NAME.html (:mod:`compose.output.html`); its copy of the
    map is kept while rendering and its proofs are computed from that copy.
    """
    t0 = time.perf_counter()
    paths = output_paths(style, out_dir)
    if not legend:
        paths.pop("legend")
    if not check:
        paths.pop("check")
    if not html:
        paths.pop("html")
    check_writable(list(paths.values()), overwrite)
    run_ = prepare(style)
    try:
        canvas = run_.canvas
        tags = {"TIFFTAG_DOCUMENTNAME": style.map.title or style.name,
                "TIFFTAG_IMAGEDESCRIPTION": CAUTION, "TIFFTAG_SOFTWARE": "compose"}
        with contextlib.ExitStack() as stack:
            png_tmp = stack.enter_context(atomic_path(paths["png"]))
            tif_tmp = stack.enter_context(atomic_path(paths["tif"]))
            png = _PngSink(png_tmp, canvas.width, canvas.height, canvas.dpi)
            tif = _TiffSink(tif_tmp, canvas, tags)
            stack.callback(tif.writer.close)
            stack.callback(png.writer.abort)
            # the encoders run on their own threads, beside the next windows' compute
            png_bg, tif_bg = BackgroundSink(png, "png"), BackgroundSink(tif, "geotiff")
            stack.callback(tif_bg.abort)
            stack.callback(png_bg.abort)
            preview = None
            if html:
                from compose.output.html import PreviewSink
                preview = PreviewSink(canvas.width, canvas.height)
            stats = run(run_, [png_bg, tif_bg] + ([preview] if preview is not None else [])
                        + list(extra_sinks or []), progress=progress)
            t_enc = time.perf_counter()
            png_bg.finish()
            tif_bg.finish()
            png.writer.close()
            tif.writer.close()
            run_.seconds["finish-encode"] = time.perf_counter() - t_enc
            report = None
            if check:
                from compose.check import check_style
                report = check_style(style, stats, run_.ramps)
                with atomic_path(paths["check"]) as tmp:
                    tmp.write_text(json.dumps(report.to_json(), indent=2))
            if legend:
                from compose.output.legend import write_legend
                with atomic_path(paths["legend"]) as tmp:
                    write_legend(tmp, style, run_.ramps, run_.layers)
            if html:
                from compose.output.html import page_html
                t_html = time.perf_counter()
                seconds = dict(run_.seconds, total=t_html - t0)
                partial = RenderResult(outputs=paths, width=canvas.width, height=canvas.height,
                                       seconds=seconds, statistics=stats, report=report,
                                       unplaced_labels=run_.unplaced_labels, ramps=run_.ramps)
                text = page_html(style, partial, Path(out_dir), preview=preview.image())
                with atomic_path(paths["html"]) as tmp:
                    tmp.write_text(text, encoding="utf-8")
                run_.seconds["html"] = time.perf_counter() - t_html
        seconds = dict(run_.seconds)
        seconds["total"] = time.perf_counter() - t0
        return RenderResult(outputs=paths, width=canvas.width, height=canvas.height, seconds=seconds,
                            statistics=stats, report=report, unplaced_labels=run_.unplaced_labels,
                            ramps=run_.ramps)
    finally:
        run_.close()
