"""The page as one matplotlib figure: map frame (raster + vectors), neat line, grid ticks, title,
subtitle, legend, scale bar, north arrow, credits and caution, from a :class:`PageLayout`.

One description, three writers (:mod:`compose.page.write`): the PDF and SVG get the raster
layers as one embedded image at the canvas resolution with the overlays as vectors and real
text; the page PNG gets the finished map composite (what the checker judged) with the same
furniture. The figure's size is the paper's, so points are points on paper.
"""
from __future__ import annotations

import math

import numpy as np

from compose.page.contrast import GRID_ALPHA
from compose.page.geometry import BAR_LABEL_PT, grid_lines
from compose.page.layout import (
    NOTE_PT,
    PAD,
    SCALE_LINE_PT,
    SCALE_LINE_STEP,
    SCALE_LINE_TOP,
    SUBTITLE_PT,
    TITLE_PT,
    PageLayout,
    scale_lines,
)
from compose.page.vectors import emit_layer

__all__ = ["page_figure", "start_page_figure", "finish_page_figure", "finishes", "furniture_only",
           "map_image", "add_map_image", "format_coordinate", "shrink_artists", "FONT"]

FONT = "DejaVu Sans"
_IN = 25.4
MAP_AXES = "map frame"      # label of the axes holding the map's image and vectors


def _rgb(c) -> tuple[float, float, float]:
    return tuple(float(np.clip(v, 0, 1)) for v in c)


def format_coordinate(value: float, axis: str, geographic: bool, step: float) -> str:
    """A grid label: degrees (and minutes when the step is under a degree) with a hemisphere,
    or projected units with thin-space thousands groups."""
    if geographic:
        hemi = ("E" if value >= 0 else "W") if axis == "x" else ("N" if value >= 0 else "S")
        v = abs(value)
        d = int(math.floor(v + 1e-9))
        m = (v - d) * 60
        if step < 1 or abs(m) > 1e-6:
            return f"{d}\u00b0{round(m):02d}\u2032{hemi}"
        return f"{d}\u00b0{hemi}"
    text = f"{value:,.0f}" if abs(step) >= 1 else f"{value:,.2f}"
    return text.replace(",", "\u2009").replace("-", "\u2212")


def _frame_crossings(pts_mm: np.ndarray, edge: float, along: int) -> list[float]:
    """Positions along the other axis where a polyline crosses ``coord[along] == edge``."""
    v = pts_mm[:, along] - edge
    out = []
    for i in np.flatnonzero(v[:-1] * v[1:] <= 0):
        a, b = v[i], v[i + 1]
        t = 0.5 if a == b else a / (a - b)
        out.append(float(pts_mm[i, 1 - along] + t * (pts_mm[i + 1, 1 - along] - pts_mm[i, 1 - along])))
    return out


class _Page:
    """Draws furniture into a full-page axes in mm (y down)."""

    def __init__(self, fig, layout: PageLayout, page):
        W, H = layout.size
        self.fig, self.layout, self.page = fig, layout, page
        self.ink = _rgb(page.ink)
        self.paper = _rgb(page.color)
        ax = fig.add_axes((0, 0, 1, 1), zorder=2)
        ax.set_axis_off()
        ax.set_xlim(0, W)
        ax.set_ylim(H, 0)
        ax.patch.set_visible(False)
        self.ax = ax

    def axes_at(self, box, zorder=3):
        W, H = self.layout.size
        x, y, w, h = box
        return self.fig.add_axes((x / W, 1 - (y + h) / H, w / W, h / H), zorder=zorder)

    def text(self, x, y, s, size, **kw):
        kw.setdefault("color", self.ink)
        # the page's words as written: a "$" is a dollar, never the start of mathtext
        return self.ax.text(x, y, s, fontsize=size, family=FONT, parse_math=False, **kw)

    def paper_box(self, box):
        from matplotlib.patches import Rectangle
        x, y, w, h = box
        self.ax.add_artist(Rectangle((x, y), w, h, facecolor=self.paper, edgecolor=self.ink,
                                    lw=0.4, zorder=1))

    # --- pieces -------------------------------------------------------------------------------

    def bands(self):
        texts = {"title": (self.layout.title, TITLE_PT, dict(weight="bold")),
                 "subtitle": (self.page.subtitle, SUBTITLE_PT, {}),
                 "credits": (self.page.credits, NOTE_PT, {}),
                 "caution": (self.page.caution, NOTE_PT, dict(style="italic"))}
        for piece in self.layout.pieces:
            if piece.kind in texts:
                s, size, kw = texts[piece.kind]
                x, y, w, h = piece.box
                # a line wider than the page is set smaller to fit (compose.page.layout.band_scale)
                self.text(x, y + h * 0.5, s, size * piece.scale, va="center", ha="left", **kw)

    def neatline(self):
        from matplotlib.patches import Rectangle
        fx, fy, fw, fh = self.layout.frame
        self.ax.add_artist(Rectangle((fx, fy), fw, fh, fill=False, edgecolor=self.ink, lw=0.6,
                                    joinstyle="miter", zorder=2))

    def scalebar(self, piece):
        from matplotlib.patches import Rectangle
        bar = self.layout.scalebar
        x, y, w, h = piece.box
        if piece.inside:
            self.paper_box(piece.box)
            x, y = x + PAD, y + PAD
        x0 = x + 1.5
        top = y + 4.2
        seg = bar.length_mm / bar.segments
        for i in range(bar.segments):
            self.ax.add_artist(Rectangle((x0 + i * seg, top), seg, 1.4,
                                        facecolor=self.ink if i % 2 == 0 else self.paper,
                                        edgecolor=self.ink, lw=0.4, zorder=3))
        # the boundaries whose labels keep apart (compose.page.geometry.bar_divisions)
        for i in bar.marks:
            self.text(x0 + i * seg, top - 0.8, bar.label(i), BAR_LABEL_PT,
                      ha="center", va="bottom", zorder=3)
        self.text(x0 + bar.length_mm + 2.2, top + 0.7, bar.unit, BAR_LABEL_PT, ha="left",
                  va="center", zorder=3)
        for k, s in enumerate(scale_lines(self.page, bar)):
            self.text(x0, top + SCALE_LINE_TOP + k * SCALE_LINE_STEP, s, SCALE_LINE_PT,
                      ha="left", va="top", zorder=3)

    def north(self, piece):
        from matplotlib.patches import Polygon
        x, y, w, h = piece.box
        if piece.inside:
            self.paper_box(piece.box)
        cx, cy = x + w / 2, y + h / 2 + 1.5
        a = math.radians(self.layout.north)
        ux, uy = math.sin(a), -math.cos(a)          # true north in mm, y down
        px, py = -uy, ux                            # perpendicular
        L, half = 4.6, 1.7
        tip = (cx + ux * L, cy + uy * L)
        left = (cx + px * half - ux * L * 0.9, cy + py * half - uy * L * 0.9)
        right = (cx - px * half - ux * L * 0.9, cy - py * half - uy * L * 0.9)
        notch = (cx - ux * L * 0.55, cy - uy * L * 0.55)
        self.ax.add_artist(Polygon([tip, left, notch], closed=True, facecolor=self.ink,
                                  edgecolor=self.ink, lw=0.4, zorder=3))
        self.ax.add_artist(Polygon([tip, notch, right], closed=True, facecolor=self.paper,
                                  edgecolor=self.ink, lw=0.4, zorder=3))
        self.text(cx + ux * (L + 2.2), cy + uy * (L + 2.2), "N", 7.5, ha="center", va="center",
                  weight="bold", rotation=-self.layout.north, zorder=3)

    def legend(self, piece, legend_layout, key_patch):
        from compose.output.legend import draw_legend
        box = piece.box
        if piece.inside:
            self.paper_box(box)
            box = (box[0] + PAD, box[1] + PAD, box[2] - 2 * PAD, box[3] - 2 * PAD)
        ax = self.axes_at(box)
        ax.patch.set_visible(False)
        draw_legend(ax, legend_layout, key_patch=key_patch)
        if piece.scale < 1.0:             # shrunk to fit the panel: type and strokes too
            shrink_artists(ax, piece.scale)

    def grid(self, canvas):
        from pyproj import CRS
        g = self.page.grid
        fx, fy, fw, fh = self.layout.frame
        sx, sy = fw / canvas.width, fh / canvas.height
        geographic = CRS.from_user_input(g.crs or canvas.crs).is_geographic
        tick = 1.4
        ticks = []          # (axis, edge, sign, position along the edge, line index, label)
        for axis, value, pts in grid_lines(canvas, g.crs, g.step):
            mm = np.column_stack([fx + pts[:, 0] * sx, fy + pts[:, 1] * sy])
            label = format_coordinate(value, axis, geographic, g.step)
            index = round(value / g.step)
            if g.lines:
                from matplotlib.patches import Rectangle
                line, = self.ax.plot(mm[:, 0], mm[:, 1], color=self.ink, lw=0.3, alpha=GRID_ALPHA,
                                     zorder=1.5)
                line.set_clip_path(Rectangle((fx, fy), fw, fh, transform=self.ax.transData))
            if axis == "x":
                for edge, sign in ((fy, -1), (fy + fh, 1)):
                    ticks += [("x", edge, sign, xc, index, label)
                              for xc in _frame_crossings(mm, edge, 1)
                              if fx - 1e-6 <= xc <= fx + fw + 1e-6]
            else:
                for edge, sign in ((fx, -1), (fx + fw, 1)):
                    ticks += [("y", edge, sign, yc, index, label)
                              for yc in _frame_crossings(mm, edge, 0)
                              if fy - 1e-6 <= yc <= fy + fh + 1e-6]
        every = {axis: grid_label_step([t for t in ticks if t[0] == axis]) for axis in ("x", "y")}
        for axis, edge, sign, at, index, label in ticks:
            labelled = index % every[axis] == 0
            if axis == "x":
                self.ax.plot([at, at], [edge, edge + sign * tick], color=self.ink, lw=0.4,
                             zorder=2)
                if labelled:
                    self.text(at, edge + sign * (tick + 0.4), label, GRID_LABEL_PT, ha="center",
                              va="bottom" if sign < 0 else "top")
            else:
                self.ax.plot([edge, edge + sign * tick], [at, at], color=self.ink, lw=0.4,
                             zorder=2)
                if labelled:
                    self.text(edge + sign * (tick + 0.5), at, label, GRID_LABEL_PT,
                              ha="center", va="bottom" if sign < 0 else "top",
                              rotation=90, rotation_mode="anchor")


#: the grid labels' type (pt) and the least room between two along an edge (mm; common
#: practice, no source: as the scale bar's labels)
GRID_LABEL_PT, GRID_LABEL_GAP = 5.5, 1.0


def grid_label_step(ticks) -> int:
    """Label every k-th grid line (those whose index, value / step, is a multiple of k), the
    smallest k for which the labels along each edge, centred on their ticks, keep
    :data:`GRID_LABEL_GAP` apart in the page's font; every line keeps its tick. ``ticks``:
    (axis, edge, sign, position mm along the edge, line index, label) of one axis. Labels were
    written at every line however close: on a small sheet they ran into each other."""
    from compose.layers.label_text import text_width

    width = {t[5]: text_width(t[5], GRID_LABEL_PT, FONT, "normal") * _IN / 72.0 for t in ticks}
    edges: dict = {}
    for t in ticks:
        edges.setdefault((t[1], t[2]), []).append(t)
    for k in range(1, len(ticks) + 2):
        fits = True
        for row in edges.values():
            kept = sorted((t for t in row if t[4] % k == 0), key=lambda t: t[3])
            if any(b[3] - a[3] < (width[a[5]] + width[b[5]]) / 2 + GRID_LABEL_GAP
                   for a, b in zip(kept, kept[1:])):
                fits = False
                break
        if fits:
            return k
    return len(ticks) + 2


def shrink_artists(ax, s: float) -> None:
    """Scale every size given in points in ``ax`` by ``s`` (type, line widths, markers, halos),
    so a legend drawn into an axes ``s`` times its size keeps its proportions."""
    from matplotlib.patheffects import Stroke, withStroke

    for t in ax.texts:
        t.set_fontsize(t.get_fontsize() * s)
        effects = []
        for e in t.get_path_effects():
            kw = getattr(e, "_gc", {})
            if isinstance(e, (Stroke, withStroke)) and "linewidth" in kw:
                kw = dict(kw, linewidth=kw["linewidth"] * s)
                e = type(e)(**kw) if isinstance(e, withStroke) else Stroke(**kw)
            effects.append(e)
        t.set_path_effects(effects)
    for line in ax.lines:
        line.set_linewidth(line.get_linewidth() * s)
        line.set_markersize(line.get_markersize() * s)
    for patch in ax.patches:
        patch.set_linewidth(patch.get_linewidth() * s)


def start_page_figure(style, layout: PageLayout, *, layers=()):
    """The page's figure with what depends neither on the walk nor on the legend: the paper,
    the map frame's axes and the overlays in it (``layers``, re-emitted as vectors). The frame
    and the paper size do not depend on the legend (:func:`compose.page.layout.page_layout`), so
    a figure started from a layout without one is finished with the legend's
    (:func:`finish_page_figure`)."""
    from matplotlib.figure import Figure
    from matplotlib.patches import Rectangle

    page = style.page
    W, H = layout.size
    canvas = layout.canvas
    fig = Figure(figsize=(W / _IN, H / _IN), facecolor=_rgb(page.color))
    fx, fy, fw, fh = layout.frame
    ma = fig.add_axes((fx / W, 1 - (fy + fh) / H, fw / W, fh / H), zorder=1, label=MAP_AXES)
    ma.set_axis_off()
    ma.set_xlim(0, canvas.width)
    ma.set_ylim(canvas.height, 0)
    ma.set_autoscale_on(False)
    clip = Rectangle((0, 0), canvas.width, canvas.height, transform=ma.transData)
    for i, layer in enumerate(layers):
        for artist in emit_layer(ma, layer, canvas.transform, 1.0 + i):
            artist.set_clip_path(clip)
    fig.compose_frame = (tuple(layout.size), tuple(layout.frame))
    return fig


def add_map_image(fig, layout: PageLayout, image: np.ndarray) -> None:
    """Put the map's raster ``image`` (H, W, 3) uint8 in the map frame of ``fig``, under the
    overlays (they are drawn above it by zorder, whenever either was added)."""
    canvas = layout.canvas
    ma = next(ax for ax in fig.axes if ax.get_label() == MAP_AXES)
    # a fixed id: the SVG writer would otherwise hash the text of the image's PNG bytes
    ma.imshow(image, extent=(0, canvas.width, canvas.height, 0), interpolation="none",
              resample=False, aspect="auto", zorder=0, gid="map-raster")


def finishes(fig, layout: PageLayout) -> bool:
    """Whether ``fig`` (from :func:`start_page_figure`) has ``layout``'s paper and frame."""
    return getattr(fig, "compose_frame", None) == (tuple(layout.size), tuple(layout.frame))


def finish_page_figure(fig, style, layout: PageLayout, image: np.ndarray | None,
                       legend_layout=None):
    """Add the map's raster ``image`` (under the overlays: they are drawn above it by zorder)
    and the furniture to a figure from :func:`start_page_figure`; returns it."""
    page = style.page
    canvas = layout.canvas
    if image is not None:
        add_map_image(fig, layout, image)
    p = _Page(fig, layout, page)
    p.bands()
    if page.neatline:
        p.neatline()
    if page.grid is not None:
        p.grid(canvas)
    for piece in layout.pieces:
        if piece.kind == "scalebar":
            p.scalebar(piece)
        elif piece.kind == "north":
            p.north(piece)
        elif piece.kind == "legend" and legend_layout is not None:
            p.legend(piece, legend_layout, _rgb(style.map.background))
    return fig


def page_figure(style, layout: PageLayout, image: np.ndarray | None, *, layers=(),
                legend_layout=None):
    """The page as a matplotlib Figure.

    image: (H, W, 3) uint8 of the canvas drawn in the frame, or None to leave the frame empty
    (the page PNG pastes the map in afterwards); layers: prepared overlay layers
    (``RenderRun.layers``) re-emitted as vectors on top of it (empty for the PNG, whose image
    already holds them); legend_layout: from :func:`compose.output.legend.legend_layout` at the
    page's legend width, or None.
    """
    return finish_page_figure(start_page_figure(style, layout, layers=layers), style, layout,
                              image, legend_layout)


def map_image(fig):
    """The map frame's raster image (a matplotlib ``AxesImage``) of a page figure, or None."""
    for ax in fig.axes:
        if ax.get_label() == MAP_AXES:
            return ax.images[0] if ax.images else None
    return None


def furniture_only(fig) -> None:
    """Hide what :func:`page_figure` drew in the map frame (the raster image and the vectors),
    leaving the furniture: the page PNG draws that over the finished map. Drawing the figure
    afterwards gives the same pixels as a figure built without image and layers (the frame's
    axes draws nothing else: no patch, no axis)."""
    for ax in fig.axes:
        if ax.get_label() == MAP_AXES:
            ax.set_visible(False)
