"""Writing the page: a sink of the render walk that keeps the map (and its raster part), then
NAME.pdf, NAME.svg and NAME.page.png from one figure (:mod:`compose.page.draw`), and the world
file beside the map PNG.

The PDF and SVG keep text as text (fonts embedded in the PDF as glyph outlines or TrueType
subsets, ``page.pdf_fonts``, searchable either way; ``<text>`` elements in the SVG) and are at
the paper's physical size.
"""
from __future__ import annotations

import contextlib
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from types import SimpleNamespace
from typing import Any

import numpy as np

from compose.page.layout import PageLayout, blocked_pixels, page_layout

__all__ = ["PageSink", "vector_split", "without_setter_listings", "legend_for_page", "fit_legend",
           "write_page", "page_ahead", "page_png", "EarlyPage", "page_early", "furniture_rgba", "paste_map",
           "write_page_png", "world_file_text", "warm_writers",
           "write_world_file", "page_paths", "blocked_for", "RC"]

#: matplotlib settings of the vector writers: text stays text (``pdf.fonttype`` follows
#: ``page.pdf_fonts``: 3 for outlines, 42 for TrueType); the PDF's content streams deflated at
#: level 1 (the demo's PDF 1 % larger than at matplotlib's 6, written 11 % faster; the map's
#: image is deflated by :mod:`compose.page.encode` either way).
RC = {"pdf.fonttype": 3, "svg.fonttype": "none", "lines.scale_dashes": False,
      "path.simplify": False, "pdf.compression": 1}
PDF_FONTTYPE = {"outlines": 3, "truetype": 42}


def vector_split(layers) -> int:
    """Index of the first layer of the top run of vector layers: the layers under it form the
    page's raster image, the ones from it up are re-emitted as vectors. A vector layer with a
    raster layer above it stays in the raster, so the stacking order is kept."""
    from compose.page.vectors import is_vector  # matplotlib: not for compose check's start-up

    k = len(layers)
    while k > 0 and is_vector(layers[k - 1].spec.kind):
        k -= 1
    return k


@contextlib.contextmanager
def without_setter_listings():
    """Within the block, matplotlib classes of drawn things (its ``Artist`` subclasses) are
    created without the list of every property it writes into the docstring of each one's
    ``set`` method (and of the functions quoting such lists) by inspecting all their setters: a
    third of the CPU time of loading the page writers (about 0.23 of 0.78 s of the figure, the
    PDF, SVG and Agg backends and the legend, measured alternately), text nothing here reads.
    Only documentation differs: the lists of the classes and functions loaded in the block stay
    empty in this process."""
    try:
        import matplotlib.artist as artist
    except Exception:                                  # pragma: no cover - the writer reports it
        yield
        return
    listing = getattr(artist, "kwdoc", None)
    if listing is not None:
        artist.kwdoc = lambda _cls: ""
    try:
        yield
    finally:
        if listing is not None:
            artist.kwdoc = listing


def warm_writers() -> None:
    """Import what the page writers use (matplotlib's figure, PDF/SVG/Agg backends, the page and
    legend drawing; :func:`without_setter_listings`); errors are left for the writers
    themselves to raise. fontTools' font subsetter, which matplotlib's PDF writer imports with
    itself but uses only to embed TrueType subsets (``page.pdf_fonts = "truetype"``), and TeX's
    DVI reader load when first used (:func:`compose.lazy.on_first_use`; the subsetter was 0.09
    of the 0.26 s CPU of loading the page writers, the reader 0.03, measured here)."""
    try:
        from compose.lazy import on_first_use

        on_first_use("fontTools.subset")
        on_first_use("matplotlib.dviread")
        with without_setter_listings():
            import matplotlib.backends.backend_agg  # noqa: F401
            import matplotlib.backends.backend_pdf  # noqa: F401
            import matplotlib.backends.backend_svg  # noqa: F401
            import matplotlib.figure  # noqa: F401

            import compose.output.legend  # noqa: F401
            import compose.page.draw  # noqa: F401
    except Exception:                                  # pragma: no cover - the writer reports it
        pass


class PageSink:
    """Keeps the whole map (``image``) and its raster part (``base``, layers under ``below``),
    in memory shared with a page process forked after it (:mod:`compose.page.process`)."""

    def __init__(self, canvas, below: int):
        from compose.page.process import shared_image

        self.below = int(below)
        self.image = shared_image(canvas.height, canvas.width)
        #: ``base`` with an alpha of 255: what matplotlib makes of it to draw it, read by the
        #: PDF writer only when the file is finished (:func:`page_early`)
        self.rgba = shared_image(canvas.height, canvas.width, 4)
        self.rgba[..., 3] = 255
        self.base = self.rgba[..., :3]
        #: called with the number of ``base`` rows finished so far and :attr:`nodata`, after
        #: each band
        self.listener = None
        #: the layers with no-data pixels in the windows walked so far (None: not known), kept
        #: up to date by the render (the page process guesses the final set from it)
        self.nodata: set[str] | None = None

    def rows(self, row0: int, rgb8: np.ndarray) -> None:
        self.image[row0:row0 + rgb8.shape[0]] = rgb8

    def below_rows(self, row0: int, rgb8: np.ndarray) -> None:
        self.base[row0:row0 + rgb8.shape[0]] = rgb8
        if self.listener is not None:
            self.listener(row0 + rgb8.shape[0], self.nodata)


def page_paths(style, out_dir: Path) -> dict[str, Path]:
    """NAME.pdf, NAME.svg and NAME.page.png in ``out_dir``."""
    out_dir = Path(out_dir)
    return {"pdf": out_dir / f"{style.name}.pdf", "svg": out_dir / f"{style.name}.svg",
            "page": out_dir / f"{style.name}.page.png"}


def _legend_width_in() -> float:
    from compose.page.layout import PANEL_WIDTH
    return PANEL_WIDTH / 25.4


def legend_for_page(style, ramps, layers, nodata_seen: set[str] | None = None,
                    columns: int = 1, width: float | None = None):
    """The legend's layout at the page's legend width, or None when the page has no legend;
    ``nodata_seen``: the layers with no-data pixels (see :func:`compose.output.legend_layout`);
    ``columns``: class lists in up to this many columns; ``width``: inches (default the panel's)."""
    if style.page.legend == "off":
        return None
    from compose.output.legend import legend_layout
    return legend_layout(style, ramps, layers, width=width or _legend_width_in(),
                         nodata_seen=nodata_seen, columns=columns)


def _layout(style, legend) -> PageLayout:
    size = (legend.width * 25.4, legend.height * 25.4) if legend is not None else None
    return page_layout(style, size)


def fit_legend(style, ramps, layers, nodata_seen=None):
    """The page's legend layout: as it is when the panel holds it shrunk to no less than
    :data:`compose.page.layout.MIN_SCALE`; else the least shrunk of its class lists reflowed into
    2-4 columns, laid out wider (panel width / shrink) so the shrunk legend fills the panel's
    width. A legend that would need shrinking below :data:`compose.page.layout.FLOOR_SCALE` is an
    error naming the key. None without a legend."""
    from compose.errors import StyleError
    from compose.page.layout import FLOOR_SCALE, MIN_SCALE, PANEL_WIDTH

    legend = legend_for_page(style, ramps, layers, nodata_seen)
    if legend is None or style.page.legend != "panel":
        return legend
    best, best_scale = legend, _layout(style, legend).piece("legend").scale
    if best_scale < MIN_SCALE:
        for n in (2, 3, 4):
            for s in np.arange(0.98, FLOOR_SCALE - 1e-9, -0.02):
                if s <= best_scale:             # the shrink is at most s: no gain below
                    break
                flowed = legend_for_page(style, ramps, layers, nodata_seen, columns=n,
                                         width=PANEL_WIDTH / 25.4 / s)
                scale = _layout(style, flowed).piece("legend").scale
                if scale > best_scale + 1e-6:
                    best, best_scale = flowed, scale
    if best_scale < FLOOR_SCALE:
        raise StyleError(f"page.legend: the legend needs shrinking to {best_scale:.0%} to fit the "
                         f"panel even in columns; use a larger paper, place it in a corner or show "
                         f"fewer classes (legend.show)")
    return best


def blocked_for(style, ramps, layers) -> list[tuple[float, float, float, float]]:
    """Canvas pixel boxes labels must keep clear of: the furniture inside the map frame.
    ``layers``: prepared layers, or stand-ins with a ``spec`` for those not prepared yet."""
    if style.page is None:
        return []
    inside = [style.page.legend, style.page.north, style.page.scalebar.place]
    if all(p in ("panel", "off") for p in inside):
        return []
    return blocked_pixels(_layout(style, fit_legend(style, ramps, layers)))


def stand_in(spec):
    """A placeholder for a layer not prepared yet (the legend only needs its spec)."""
    return SimpleNamespace(spec=spec)


def _rc(style) -> dict:
    return dict(RC, **{"pdf.fonttype": PDF_FONTTYPE[style.page.pdf_fonts]})


def page_ahead(style, run_, sink: PageSink):
    """The page's figure started before the walk ends (:func:`compose.page.draw.start_page_figure`:
    the map frame and the overlays as vectors), for :func:`write_page`'s ``ahead``."""
    from matplotlib import rc_context

    from compose.page.draw import start_page_figure

    with rc_context(_rc(style)):
        return start_page_figure(style, _layout(style, None), layers=run_.layers[sink.below:])


def _frozen(nodata) -> frozenset[str] | None:
    return None if nodata is None else frozenset(nodata)


@dataclass
class EarlyPage:
    """What of the page depends on the walk only through the layers that show no-data, made
    while the walk runs from a guess of them (``nodata``: the layers with no-data pixels in the
    windows walked so far): the legend's layout, the page layout, the figure with its furniture
    (no map image yet), the page PNG's furniture drawn by Agg (:func:`furniture_rgba`) and the
    legend PNG. :func:`write_page` uses it only when the walk ends with the same set."""

    nodata: frozenset[str] | None
    legend: Any
    layout: PageLayout
    fig: Any
    furniture: tuple[np.ndarray, tuple] | None
    legend_png: bytes | None = None
    #: seconds the PDF took when it was written here (its drawing during the walk), else None
    pdf_seconds: float | None = None
    #: the SVG drawn during the walk, its map image a placeholder
    #: (:func:`compose.page.encode.deferred`), and the seconds it took; None when not drawn
    svg: bytes | None = None
    svg_seconds: float = 0.0
    #: the process writing the page PNG, forked when the walk ended with ``nodata``
    #: (a :class:`compose.page.process.Forked`), or None
    png_job: Any = None

    def holds_for(self, nodata) -> bool:
        """Whether it was made for the no-data layers ``nodata`` the walk ended with."""
        return self.nodata == _frozen(nodata)


class _AtTheEnd:
    """An artist drawing nothing, last in its figure: ``fn()`` runs when it is drawn."""

    def __new__(cls, fn):
        from matplotlib.artist import Artist

        class AtTheEnd(Artist):
            zorder = 1e12

            def draw(self, renderer):
                fn()

        return AtTheEnd()


def page_early(style, run_, sink: PageSink, nodata: set[str] | None, ahead=None,
               legend_png: Callable | None = None, tmp: dict[str, Path] | None = None,
               rest: Callable[[], Any] | None = None,
               on_guess: Callable | None = None) -> EarlyPage:
    """The :class:`EarlyPage` of ``nodata`` (``ahead``: the figure :func:`page_ahead` started,
    finished here when its frame is the layout's; ``legend_png(run_, nodata)``: the legend PNG's
    bytes). With ``tmp`` and ``rest`` (a call that returns once the walk is over, in a forked
    page process), the PDF is written too: drawn while the walk runs, its map image drawn from
    ``sink.rgba`` without a copy (matplotlib's own RGBA of an image, set in place) and the file
    finished, with the map's pixels, once ``rest()`` returned (an artist drawn last waits for
    it); the figure's image is then the finished map. ``on_guess(nodata, layout, legend_png)``
    is called as soon as those are made, before the PDF."""
    from matplotlib import rc_context

    from compose.page.draw import add_map_image, finish_page_figure, finishes, start_page_figure
    from compose.timeline import span

    with span("page legend fit"):
        legend = fit_legend(style, run_.ramps, run_.layers, nodata)
        layout = _layout(style, legend)
    rc = _rc(style)
    with rc_context(rc):
        with span("page figure early"):
            fig = (ahead if ahead is not None and finishes(ahead, layout)
                   else start_page_figure(style, layout, layers=run_.layers[sink.below:]))
            finish_page_figure(fig, style, layout, None, legend_layout=legend)
        with span("page furniture"):        # from the same figure, left as it was
            furniture = furniture_rgba(style, layout, legend, run_.canvas.dpi, fig=fig,
                                       keep=True)
    with span("legend png"):
        png = legend_png(run_, nodata) if legend_png is not None else None
    early = EarlyPage(_frozen(nodata), legend, layout, fig, furniture, png)
    if on_guess is not None:
        on_guess(nodata, layout, png)
    if tmp is None or rest is None:
        return early
    import io

    from compose.page.encode import deferred, fast_png

    add_map_image(fig, layout, sink.base)        # (its pixels are not read: see below)
    # the SVG, drawn now with a stand-in for the map's PNG data, which is put in once the map is
    # walked (compose.page.encode.filled): the SVG writer embeds an image as it draws it
    t = time.perf_counter()
    try:
        with rc_context(rc), fast_png(), deferred(sink.base.shape[1], sink.base.shape[0]), \
                span("page svg drawn early"):
            buf = io.BytesIO()
            fig.savefig(buf, format="svg", facecolor=fig.get_facecolor(),
                        metadata=_svg_metadata(style, layout))
        early.svg, early.svg_seconds = buf.getvalue(), time.perf_counter() - t
    except Exception:                            # drawn after the walk instead
        early.svg = None
    def walked() -> None:
        # the walk is over: when it ended with the guessed no-data layers, the page PNG (the
        # furniture drawn above over the finished map) is written by a process forked now,
        # beside the PDF's last part, instead of after it (write_page waits for it)
        final = rest()
        if (early.holds_for(final) and furniture is not None and "page" in tmp
                and early.png_job is None):
            from compose.page.process import Forked, can_fork

            if can_fork():
                early.png_job = Forked(lambda: _early_page_png(tmp["page"], furniture, layout,
                                                               sink.image, run_.canvas.dpi))

    end = _AtTheEnd(walked)
    fig.add_artist(end)
    t = time.perf_counter()
    try:
        with rc_context(rc), fast_png(), span("page pdf drawn early"), \
                map_rows_stored_top_first(fig, sink.base, sink.rgba):
            fig.savefig(tmp["pdf"], format="pdf", facecolor=fig.get_facecolor(),
                        metadata=_pdf_metadata(style, layout))
    except BaseException:
        if early.png_job is not None:               # the page is drawn again: end it first
            early.png_job.abort()
            early.png_job = None
        raise
    finally:
        end.remove()
    early.pdf_seconds = time.perf_counter() - t
    return early


def _early_page_png(path: Path, furniture: tuple[np.ndarray, tuple], layout: PageLayout,
                    image: np.ndarray, dpi: float) -> dict[str, float]:
    """Write the page PNG from the furniture drawn during the walk and the finished map (in
    the process :func:`page_early` forks when the walk ends); its seconds."""
    from compose.output.png import write_png
    from compose.timeline import span

    t = time.perf_counter()
    with span("page png"):
        dpi = max(float(dpi), MIN_PAGE_DPI)
        write_png(path, paste_map(*furniture, layout, image, dpi), dpi=dpi)
    return {"page.png": time.perf_counter() - t}


def _pdf_metadata(style, layout) -> dict:
    return {"Title": layout.title or style.name, "Subject": style.page.caution,
            "Creator": "compose"}


def _svg_metadata(style, layout) -> dict:
    return {"Title": layout.title or style.name, "Description": style.page.caution}


def write_page(style, run_, sink: PageSink, tmp: dict[str, Path],
               nodata_seen: set[str] | None = None,
               on_layout=None, fork: bool = False, ahead=None,
               with_png=None, early: EarlyPage | None = None) -> tuple[dict[str, float], PageLayout]:
    """Write the page outputs to the temporary paths ``tmp`` (keys of :func:`page_paths`);
    returns (seconds per output, the layout). ``on_layout(layout)``: called as soon as the
    layout is decided, before the files are drawn. ``fork``: the page PNG is drawn by a forked
    process from the same figure while this one writes the PDF and SVG (only where no other
    thread runs: :class:`compose.page.process.Forked`). ``ahead``: the figure
    :func:`page_ahead` started (used when its frame is the layout's). ``with_png()``: run
    first by whoever draws the page PNG (the forked process when ``fork``), outside this
    function's matplotlib settings. ``early``: the :class:`EarlyPage` made during the walk, used
    when it holds for ``nodata_seen`` (then ``ahead`` is not used)."""
    from matplotlib import rc_context

    from compose.page.draw import add_map_image, finish_page_figure, finishes, start_page_figure
    from compose.timeline import span

    if early is not None and not early.holds_for(nodata_seen):
        early = None
    if early is not None:
        legend, layout = early.legend, early.layout
    else:
        with span("page legend fit"):
            legend = fit_legend(style, run_.ramps, run_.layers, nodata_seen)
            layout = _layout(style, legend)
    if on_layout is not None:
        on_layout(layout)
    seconds = {}
    vectors = run_.layers[sink.below:]
    from compose.page.encode import fast_png

    rc = _rc(style)
    from matplotlib import rcParams

    outer = {k: rcParams[k] for k in rc}        # the settings outside the page writers
    with rc_context(rc), fast_png():
        t = time.perf_counter()
        with span("page figure"):
            if early is not None:
                fig = early.fig
                if early.pdf_seconds is None:           # (else it has the finished map)
                    add_map_image(fig, layout, sink.base)
            else:
                fig = (ahead if ahead is not None and finishes(ahead, layout)
                       else start_page_figure(style, layout, layers=vectors))
                finish_page_figure(fig, style, layout, sink.base, legend_layout=legend)
        built = time.perf_counter() - t

        def svg() -> float:
            t = time.perf_counter()
            with span("page svg"):
                text = None
                if early is not None and early.svg is not None:     # drawn during the walk
                    from compose.page.encode import filled, png_of

                    text = filled(early.svg, png_of(sink.base))
                if text is not None:
                    tmp["svg"].write_bytes(text)
                    seconds["svg drawn early"] = early.svg_seconds if early is not None else 0.0
                else:
                    fig.savefig(tmp["svg"], format="svg", facecolor=fig.get_facecolor(),
                                metadata=_svg_metadata(style, layout))
            return (early.svg_seconds if text is not None and early is not None else 0.0) \
                + time.perf_counter() - t

        # the page PNG's process also writes the SVG, beside the PDF, when its furniture was
        # drawn during the walk (else it draws it from its copy of the figure, which is changed)
        svg_beside = (fork and early is not None and early.furniture is not None
                      and early.pdf_seconds is None)

        def png() -> dict[str, float]:
            if with_png is not None:
                with rc_context(outer):
                    with_png()
            t = time.perf_counter()
            with span("page png"):
                if early is not None and early.furniture is not None:
                    from compose.output.png import write_png

                    dpi = max(float(run_.canvas.dpi), MIN_PAGE_DPI)
                    write_png(tmp["page"], paste_map(*early.furniture, layout, sink.image, dpi),
                              dpi=dpi)
                else:
                    write_page_png(tmp["page"], style, layout, sink.image, legend,
                                   run_.canvas.dpi, fig=fig)
            done = {"page.png": time.perf_counter() - t}
            if svg_beside:
                done["svg"] = svg()
            return done

        beside = None
        if early is not None and early.png_job is not None:    # forked as the walk ended
            beside = early.png_job
            if with_png is not None:        # (sends the legend unless that is done)
                with rc_context(outer):
                    with_png()
        elif fork:
            from compose.page.process import Forked

            beside = Forked(png)
        try:
            t = time.perf_counter()
            if early is not None and early.pdf_seconds is not None:
                seconds["pdf"] = early.pdf_seconds          # written during the walk
                if not svg_beside:
                    seconds["svg"] = svg()
            else:
                with span("page pdf"), map_rows_stored_top_first(fig, sink.base):
                    fig.savefig(tmp["pdf"], format="pdf", facecolor=fig.get_facecolor(),
                                metadata=_pdf_metadata(style, layout))
                seconds["pdf"] = built + time.perf_counter() - t
                if not svg_beside:
                    seconds["svg"] = svg()
            with span("page waits for png"):
                seconds.update(beside.result() if beside is not None else png())
        finally:
            if beside is not None:
                beside.abort()
    return seconds, layout


@contextlib.contextmanager
def map_rows_stored_top_first(fig, base: np.ndarray, rgba: np.ndarray | None = None):
    """Within the block the map frame's image is ``base`` upside down drawn from the bottom
    (``origin="lower"``): the same picture on the page, but matplotlib's PDF writer, which stores
    an image's rows in the reverse of the array's order, then stores ``base``'s rows top first,
    as the SVG writer does and as the page process encoded them during the walk
    (:func:`compose.page.process._walked`), so one deflate stream serves both files. ``rgba``:
    ``base`` with its alpha, the array matplotlib draws the image from in the block (not a
    copy of ``base`` made now: the PDF writer reads it when the file is finished)."""
    from compose.page.draw import map_image

    image = map_image(fig)
    if image is None:
        yield
        return
    image.set_data(base[::-1])
    image.origin = "lower"
    if rgba is not None:
        image._imcache = rgba[::-1]     # what it would compute from base[::-1], uncopied
    try:
        yield
    finally:
        image.set_data(base)
        image.origin = "upper"


#: the page PNG is drawn at no fewer dots per inch than this (a canvas of a few pixels per inch
#: is then enlarged into the frame, nearest neighbour), so its type stays drawable
MIN_PAGE_DPI = 72.0


def furniture_rgba(style, layout: PageLayout, legend, dpi: float,
                   fig=None, keep: bool = False) -> tuple[np.ndarray, tuple]:
    """The page's furniture drawn by Agg on a transparent page at ``dpi`` (at least
    :data:`MIN_PAGE_DPI`): (H, W, 4) uint8 straight RGBA, and the paper colour (RGBA floats).
    ``fig``: see :func:`page_png`; with ``keep``, ``fig`` is left as it was (its map frame
    shown again, its paper, dots per inch and canvas restored), to be written afterwards."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    from compose.page.draw import MAP_AXES, furniture_only, page_figure

    dpi = max(float(dpi), MIN_PAGE_DPI)          # type needs a few pixels per point
    if fig is None:
        fig, keep = page_figure(style, layout, None, legend_layout=legend), False
    frame = [ax for ax in fig.axes if ax.get_label() == MAP_AXES and ax.get_visible()]
    was = (fig.patch.get_alpha(), fig.dpi, fig.canvas)
    furniture_only(fig)
    paper = tuple(fig.get_facecolor())
    fig.patch.set_alpha(0.0)
    fig.set_dpi(dpi)
    agg = FigureCanvasAgg(fig)
    agg.draw()
    if keep:
        for ax in frame:
            ax.set_visible(True)
        fig.patch.set_alpha(was[0])
        fig.set_dpi(was[1])
        fig.set_canvas(was[2])
    return np.asarray(agg.buffer_rgba()), paper


def paste_map(top: np.ndarray, paper: tuple, layout: PageLayout, image: np.ndarray,
              dpi: float) -> np.ndarray:
    """The page PNG's pixels (H, W, 3) uint8: the furniture ``top`` (:func:`furniture_rgba` at
    ``dpi``) laid over the paper with the finished map ``image`` pasted pixel for pixel into
    the frame (its corner on the nearest whole page pixel)."""
    H, W = top.shape[:2]
    under = np.empty((H, W, 3), np.uint8)
    under[0] = np.round(np.array(paper[:3]) * 255).astype(np.uint8)
    under[1:] = under[0]                # whole rows copied: ten times faster than a broadcast
    fx, fy, fw, fh = layout.frame
    c0, r0 = int(round(fx / 25.4 * dpi)), int(round(fy / 25.4 * dpi))
    size = (int(round(fh / 25.4 * dpi)), int(round(fw / 25.4 * dpi)))
    if image.shape[:2] != size and min(size) > 0:   # a coarse canvas: nearest up to the frame
        rows = np.minimum((np.arange(size[0]) + 0.5) * image.shape[0] / size[0], image.shape[0] - 1)
        cols = np.minimum((np.arange(size[1]) + 0.5) * image.shape[1] / size[1], image.shape[1] - 1)
        image = image[rows.astype(int)][:, cols.astype(int)]
    h = max(0, min(image.shape[0], H - r0))
    w = max(0, min(image.shape[1], W - c0))
    under[r0:r0 + h, c0:c0 + w] = image[:h, :w]
    # straight alpha over, only where the furniture has ink (a few % of the page): top a +
    # under (1 - a), rounded; where a = 1 that is top itself ((t 255 + 127) // 255 = t)
    ink = np.flatnonzero(top[..., 3])
    a = top[..., 3].ravel()[ink].astype(np.uint16)[:, None]
    flat = under.reshape(-1, 3)
    mixed = (top.reshape(-1, 4)[ink, :3].astype(np.uint16) * a
             + flat[ink].astype(np.uint16) * (255 - a) + 127) // 255
    flat[ink] = mixed.astype(np.uint8)
    return under


def page_png(style, layout: PageLayout, image: np.ndarray, legend, dpi: float,
             fig=None) -> np.ndarray:
    """The page as (H, W, 3) uint8 at ``dpi``: the furniture drawn by Agg on a transparent
    page, laid over the paper with the finished map pasted pixel for pixel into the frame (the
    frame is the canvas at this dpi; its corner lands on the nearest whole page pixel).

    ``fig``: the page's figure already built for the PDF and SVG (:func:`page_figure` of the
    same layout and legend), drawn here with its map frame hidden instead of building the
    furniture again (it is changed: keep it for nothing else)."""
    top, paper = furniture_rgba(style, layout, legend, dpi, fig=fig)
    return paste_map(top, paper, layout, image, max(float(dpi), MIN_PAGE_DPI))


def write_page_png(path: Path, style, layout: PageLayout, image: np.ndarray, legend,
                   dpi: float, fig=None) -> None:
    """Write :func:`page_png` as a PNG at ``path`` (with its dpi)."""
    from compose.output.png import write_png

    write_png(path, page_png(style, layout, image, legend, dpi, fig=fig),
              dpi=max(dpi, MIN_PAGE_DPI))


def world_file_text(canvas) -> str:
    """The six lines of a world file for the canvas's PNG: pixel size in x, rotation terms,
    pixel size in y (negative, north-up), and the CRS coordinates of the centre of the
    upper-left pixel."""
    t = canvas.transform
    cx, cy = t.c + 0.5 * t.a + 0.5 * t.b, t.f + 0.5 * t.d + 0.5 * t.e
    return "\n".join(f"{v:.10f}".rstrip("0").rstrip(".") if v else "0"
                     for v in (t.a, t.d, t.b, t.e, cx, cy)) + "\n"


def write_world_file(path: Path, canvas) -> None:
    Path(path).write_text(world_file_text(canvas), encoding="ascii")
