"""Rendering a style into files: NAME.png (sRGB), NAME.tif (RGB GeoTIFF on the canvas grid; RGBA
with ``[map] outside = "transparent"``),
NAME.legend.png, NAME.check.json, NAME.html (the self-contained review page) and, on request,
the grey and colour-vision proofs with their contact sheet; NAME.pgw (the PNG's world file);
with a ``[page]``, NAME.pdf, NAME.svg and NAME.page.png (:mod:`compose.page`).

One walk over the windows (:func:`compose.engine.run`) feeds every output: the PNG and GeoTIFF
writers, the proof writers, a box-averaged copy of the map and the per-layer previews for the
page; the check reads the walk's merged statistics and the page is a pure function of all that
(:func:`compose.output.html.page_html`). Every file goes to a temporary name and all are renamed
into place together only when everything succeeded (:class:`compose.output.transaction.OutputSet`).
"""
from __future__ import annotations

import contextlib
import json
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from compose.caution import CAUTION
from compose.engine import WINDOW, prepare, run
from compose.output.background import BackgroundSink
from compose.output.geotiff import GeoTiffWriter
from compose.output.png import PngWriter
from compose.output.transaction import OutputSet
from compose.timeline import span

__all__ = ["RenderResult", "render_style", "output_paths", "nodata_seen", "CAUTION"]


@dataclass
class RenderResult:
    """What a render produced.

    outputs: kind -> path of every file written; width, height: the canvas in pixels;
    seconds: stage -> wall-clock seconds (prepare, compute, encode, legend, check, html, total);
    statistics: the merged :class:`compose.check.stats.Statistics` (None when not checked);
    report: the :class:`compose.check.Report` (None when not checked); unplaced_labels: layer ->
    labels that found no room; ramps: the built ramps by name; pictures: what the review page
    shows (:class:`compose.output.html_images.PagePictures`, None without a page).
    """

    outputs: dict[str, Path]
    width: int
    height: int
    seconds: dict[str, float]
    statistics: Any
    report: Any | None = None
    unplaced_labels: dict[str, list[str]] = field(default_factory=dict)
    ramps: dict = field(default_factory=dict)
    pictures: Any | None = None


class _PngSink:
    def __init__(self, path: Path, width: int, height: int, dpi: float):
        # synced as it is closed, on its encoder's thread: the commit's fsync finds it written
        self.writer = PngWriter(path, width, height, 3, dpi=dpi, sync=True)

    def rows(self, row0, rgb8):
        self.writer.write_rows(rgb8)

    def close(self):
        self.writer.close()


class _TiffSink:
    def __init__(self, path: Path, canvas, tags, cog: bool = False, alpha: bool = False):
        self.writer = GeoTiffWriter(path, canvas, tags=tags, cog=cog, alpha=alpha, stream=True,
                                    sync=True)
        self.alpha = alpha          # the engine hands the data footprint over as alpha

    def rows(self, row0, rgb8, alpha8=None):
        self.writer.write(row0, 0, rgb8, alpha8)

    def close(self):
        self.writer.close()


def nodata_seen(stats) -> set[str] | None:
    """Names of the layers with no-data pixels on the map (None without statistics)."""
    if stats is None:
        return None
    return {s.name for s in stats.layers if s.nodata_weight > 0}


def output_paths(style, out_dir: Path, *, proofs: bool = False) -> dict[str, Path]:
    """Where each output of ``style`` goes in ``out_dir`` (with ``proofs``: also the proof
    files, see :func:`compose.proof.proof_paths`)."""
    out_dir = Path(out_dir)
    name = style.name
    paths = {"png": out_dir / f"{name}.png", "world": out_dir / f"{name}.pgw",
             "tif": out_dir / f"{name}.tif", "legend": out_dir / f"{name}.legend.png",
             "check": out_dir / f"{name}.check.json", "html": out_dir / f"{name}.html"}
    if getattr(style, "page", None) is not None:
        from compose.page.write import page_paths

        paths.update(page_paths(style, out_dir))
    if proofs:
        from compose.proof import proof_paths

        paths.update({f"proof-{k}": p for k, p in proof_paths(style, out_dir).items()})
    return paths


def dated_png(data: bytes) -> bytes:
    """:func:`compose.page.dates.dated_png`: a tIME chunk when SOURCE_DATE_EPOCH is set."""
    from compose.page.dates import dated_png as dated

    return dated(data)


def _legend_png(style, prepared, nodata: set[str] | None) -> bytes:
    """The legend PNG of a prepared render (``nodata``: the layers with no-data on the map)."""
    from compose.output.legend import legend_png

    return legend_png(style, prepared.ramps, prepared.layers, nodata_seen=nodata)


def _warm(page: bool, legend: bool) -> None:
    try:
        if page:
            from compose.page.write import warm_writers

            warm_writers()
        elif legend:
            import matplotlib.backends.backend_agg  # noqa: F401
            import matplotlib.figure  # noqa: F401

            import compose.output.legend  # noqa: F401
    except Exception:                                  # pragma: no cover - the writer reports it
        pass


def _warm_imports(page: bool, legend: bool) -> None:
    """Load the modules of the writers this process runs after the walk (the page's when it is
    written here, else the legend's) on a thread beside the walk."""
    import threading

    if page or legend:
        threading.Thread(target=_warm, args=(page, legend), name="writer-imports",
                         daemon=True).start()


def _ramps_html(style, prepared) -> str:
    from compose.output.html import ramps_section

    return ramps_section(style, prepared.ramps)


def _page_job(style, prepared, tmp: dict[str, Path], legend: bool, html: bool = False):
    """The :class:`compose.page.process.PageJob` of a render, its page process forked now
    when it can (before the render starts any thread): with ``prepared`` None before the
    render is prepared (then :meth:`~compose.page.process.PageJob.attach` it), else after.
    ``legend``: the page process also draws the legend PNG; ``html``: it also makes the review
    page's ramps section. Its ``sink`` keeps the map in memory
    shared with that process."""
    from types import SimpleNamespace

    from compose.page.process import PageJob
    from compose.page.write import (
        PageSink,
        page_ahead,
        page_early,
        vector_split,
        warm_writers,
        write_page,
    )

    # the layers under the top run of overlays form the page's raster (by kind, known from the
    # specs already); the canvas is the style's (prepare makes the same)
    specs = [SimpleNamespace(spec=spec) for spec in style.layers if spec.enabled]
    canvas = prepared.canvas if prepared is not None else style.canvas()
    sink = PageSink(canvas, vector_split(prepared.layers if prepared is not None else specs))
    legend_png = (lambda run_, nodata: _legend_png(style, run_, nodata)) if legend else None
    return PageJob(style, prepared, sink, tmp, write_page, warm=warm_writers,
                   html=(lambda run_: _ramps_html(style, run_)) if html else None,
                   ahead=lambda run_: page_ahead(style, run_, sink), legend=legend_png,
                   early=lambda run_, started, nodata, rest, on_guess: page_early(
                       style, run_, sink, nodata, started, legend_png, tmp=tmp, rest=rest,
                       on_guess=on_guess))


def _noting_nodata(mapper, sink):
    """``mapper`` (None: ``map``) whose window results, as they come, add their layers with
    no-data pixels to ``sink.nodata`` (the page process guesses the legend from it)."""
    inner = mapper or map

    def noting(task, windows):
        for res in inner(task, windows):
            seen = nodata_seen(res.statistics)
            if seen is not None:
                sink.nodata = (sink.nodata or set()) | seen
            yield res
    return noting


def render_style(style, out_dir: Path, *, overwrite: bool = False,
                 progress: Callable[[int, int], None] | None = None,
                 extra_sinks: list | None = None, legend: bool = True, check: bool = True,
                 html: bool = True, proofs: bool = False,
                 mapper: Callable | None = None, window: int | None = None,
                 ramps: dict | None = None, cog: bool = False) -> RenderResult:
    """Render ``style`` into ``out_dir`` in one walk; nothing is left half-written if anything
    fails.

    ``legend`` / ``check`` / ``html``: also write NAME.legend.png / NAME.check.json / NAME.html;
    ``proofs``: also the grey and colour-vision proofs and their contact sheet
    (NAME.proof-*.png); ``extra_sinks``: more row sinks fed by the walk; ``mapper``: runs the
    window tasks (see :func:`compose.engine.run` and :mod:`compose.parallel`); ``window``: window
    side in pixels (default :data:`compose.engine.WINDOW`); ``progress(done, total)`` after each
    window; ``ramps``: built ramps to draw with instead of the style's (a series fixes shared
    breaks); ``cog``: write NAME.tif as a Cloud Optimized GeoTIFF (overviews, COG layout).
    """
    t0 = time.perf_counter()
    paths = output_paths(style, out_dir, proofs=proofs)
    for key, wanted in (("legend", legend), ("check", check), ("html", html)):
        if not wanted:
            paths.pop(key)
    from compose.page.write import blocked_for

    outputs = OutputSet(paths, overwrite=overwrite, name=style.name)   # lock, leftovers, existing
    early = None
    try:
        if style.page is not None:      # forked now: its imports load beside the preparation
            from compose.layers.label_layer import load_text_modules, measures_text

            if measures_text(style):    # loaded by prepare anyway: once, for both processes
                load_text_modules()
            early = _page_job(style, None, outputs.temporaries(), legend or html, html)
        with span("prepare"):
            prepared = prepare(style, ramps=ramps, keep_clear=blocked_for)
    except BaseException:
        if early is not None:
            early.abort()
        outputs.close()
        raise
    seconds = prepared.seconds
    try:
        canvas = prepared.canvas
        tags = {"TIFFTAG_DOCUMENTNAME": style.map.title or style.name,
                "TIFFTAG_IMAGEDESCRIPTION": CAUTION, "TIFFTAG_SOFTWARE": "compose"}
        with contextlib.ExitStack() as stack:
            tmp = outputs.temporaries()
            page_sink = page_job = None
            if early is not None:
                stack.callback(early.abort)
                if early.attach(prepared):
                    page_job = early
                else:       # the prepared render could not be sent: fork after it instead
                    early.abort()
                    page_job = _page_job(style, prepared, tmp, legend or html, html)
                    stack.callback(page_job.abort)
                page_sink = page_job.sink
            forked = page_job is not None and page_job.forked
            if not forked:      # with the page in its own process, the cores are busy now
                _warm_imports(page=page_job is not None, legend=legend or html)
            png = _PngSink(tmp["png"], canvas.width, canvas.height, canvas.dpi)
            stack.callback(png.writer.abort)
            tif = _TiffSink(tmp["tif"], canvas, tags, cog=cog,
                            alpha=getattr(style.map, "outside", "background") == "transparent")
            stack.callback(tif.writer.abort)
            # the encoders run on their own threads, beside the next windows' compute
            # and each finishes its file there too (the last rows, the tile arrays, the fsync)
            png_bg = BackgroundSink(png, "png", close=True)
            tif_bg = BackgroundSink(tif, "geotiff", close=True)
            stack.callback(tif_bg.abort)
            stack.callback(png_bg.abort)
            sinks: list = [png_bg, tif_bg]
            from compose.page.write import write_world_file

            write_world_file(tmp["world"], canvas)
            if page_sink is not None:
                sinks.append(page_sink)
            proof_sink = None
            if proofs:
                from compose.proof import PROOFS, ProofSink

                proof_sink = ProofSink({p: tmp[f"proof-{p}"] for p in PROOFS}, canvas.width,
                                       canvas.height, canvas.dpi)
                stack.callback(proof_sink.abort)
                sinks.append(proof_sink)
            page_map = layer_previews = None
            if html:
                from compose.output.html_images import PreviewSink
                from compose.previews import LayerPreviews

                page_map = PreviewSink(canvas.width, canvas.height)
                layer_previews = LayerPreviews(canvas.width, canvas.height, len(prepared.layers),
                                               tuple(style.map.background),
                                               blends=[la.spec.blend for la in prepared.layers])
                if page_map.copy is not None and page_sink is not None:
                    page_map.copy = page_sink.image     # the page keeps the whole map already
                else:
                    sinks.append(page_map)
            walk_mapper = mapper
            if page_job is not None and page_job.forked and page_sink is not None:
                walk_mapper = _noting_nodata(mapper, page_sink)
            with span("walk"):
                stats = run(prepared, sinks + list(extra_sinks or []), progress=progress,
                            previews=layer_previews, mapper=walk_mapper, window=window or WINDOW)
            if page_job is not None:         # the page process draws from here on
                page_job.start(nodata_seen(stats))
            pictures_job = None
            if page_map is not None and layer_previews is not None:      # html
                # the review page's pictures and their JPEGs on two threads from now on, beside
                # the encoders' end, the check and the waits for the page process
                from compose.output.html_images import PicturesJob
                from compose.proof import proof_images

                t_html = time.perf_counter()
                pictures_job = PicturesJob(page_map.image, layer_previews.images,
                                           [layer.spec.name for layer in prepared.layers],
                                           proof_images)
                stack.callback(pictures_job.close)
            png_bg.end()            # the encoders finish their files on their own threads
            tif_bg.end()
            report = None
            if check or html:       # beside the encoders' last rows, which need no GIL
                from compose.check import check_style

                t = time.perf_counter()
                with span("check"):
                    report = check_style(style, stats, prepared.ramps)
                seconds["check"] = time.perf_counter() - t
            t = time.perf_counter()
            with span("finish encode"):
                png_bg.finish()
                tif_bg.finish()
                t_close = time.perf_counter()
                png.writer.close()
                tif.writer.close()
                closing = time.perf_counter() - t_close
                if proof_sink is not None:
                    proof_sink.close()
            seconds["finish-encode"] = time.perf_counter() - t
            # how much of the PNG and GeoTIFF encoding ran beside the compute: the encoders'
            # own work against what the render waited for (blocked hand-overs, the end)
            work = png_bg.busy + tif_bg.busy + closing
            waited = png_bg.waited + tif_bg.waited + closing
            seconds["encode-work"] = work
            seconds["encode-waited"] = waited
            if proof_sink is not None:
                from compose.proof import write_sheet

                t = time.perf_counter()
                write_sheet(tmp["proof-sheet"], proof_sink.thumbnails(),
                            style.map.title or style.name, CAUTION)
                seconds["proofs"] = time.perf_counter() - t
            layout = None
            legend_png = None
            if (legend or html) and not forked:
                t = time.perf_counter()
                legend_png = _legend_png(style, prepared, nodata_seen(stats))
                if legend:      # the file dated by SOURCE_DATE_EPOCH; the review page's copy not
                    tmp["legend"].write_bytes(dated_png(legend_png))
                seconds["legend"] = time.perf_counter() - t
            if page_job is not None:
                with span("wait page layout"):
                    layout = page_job.layout()      # the page is written here when not forked
            if report is not None:
                t = time.perf_counter()
                if layout is not None and page_sink is not None:
                    from compose.page.contrast import with_furniture

                    report = with_furniture(report, style, layout, page_sink.image)
                if check:
                    with open(tmp["check"], "w", encoding="utf-8") as f:
                        json.dump(report.to_json(), f, indent=2)
                seconds["check"] += time.perf_counter() - t
            if (legend or html) and forked and page_job is not None:
                t = time.perf_counter()
                with span("wait legend"):
                    legend_png = page_job.legend()          # drawn by the page process
                if legend_png is None:
                    legend_png = _legend_png(style, prepared, nodata_seen(stats))
                if legend:      # the file dated by SOURCE_DATE_EPOCH; the review page's copy not
                    tmp["legend"].write_bytes(dated_png(legend_png))
                seconds["legend"] = time.perf_counter() - t
            result = RenderResult(outputs=dict(paths), width=canvas.width, height=canvas.height,
                                  seconds=seconds, statistics=stats,
                                  report=report, unplaced_labels=prepared.unplaced_labels,
                                  ramps=prepared.ramps)
            if pictures_job is not None:
                import dataclasses

                from compose.output.html import page_html

                t = time.perf_counter()
                with span("wait html pictures"):
                    pictures = pictures_job.result()
                ahead = page_job.html() if page_job is not None else None
                result.pictures = dataclasses.replace(pictures, legend=legend_png, ramps=ahead)
                seconds["total"] = t_html - t0
                with span("html"):
                    tmp["html"].write_text(page_html(style, result), encoding="utf-8")
                seconds["html"] = time.perf_counter() - t
            if page_job is not None:
                with span("wait page"):
                    page_seconds = page_job.wait()
                seconds.update({f"page {k}": v for k, v in page_seconds.items()})
        with span("commit"):
            outputs.commit()                # every file renamed into place together
        seconds["total"] = time.perf_counter() - t0
        result.seconds = dict(seconds)
        return result
    finally:
        prepared.close()
        outputs.close()
