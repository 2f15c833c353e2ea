"""NAME.legend.png: the map's legend, drawn with matplotlib's Agg renderer (object interface only).

Blocks, top to bottom in style order:

* **colour bars** for every raster layer drawn through a continuous or stepped ramp, in data
  units. Continuous ramps are drawn column by column from the layer's lookup table (the colours
  the map has, not a re-interpolation); stepped ramps as equal-width blocks with their breaks
  labelled; the out-of-domain colours as separate end squares with a '<' / '>' sign; the
  threshold break and the diverging centre are
  marked above the bar; the no-data colour as a labelled swatch (left out when no-data is
  transparent). Layers whose ramps are twins (or share a ramp) are stacked on one shared data
  scale with a single axis, so equal values can be compared across them at a glance.
* **class swatches** for ``classes`` layers, grouped under their family names.
* **overlay samples**: a short line, area, marker or text sample drawn with the layer's own
  widths (points), dashes and halo, on a light neutral key patch so light halos show; the
  topmost layer on the map first.

The style has no units key: each block is titled with its layer name, prettified
(``"land-productivity"`` -> "Land productivity"). :func:`legend_layout` gives the geometry of
the figure in pixels (tests sample the bars of the written PNG through it).
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from compose.output.legend_layout import (
    AXIS_H,
    CLASS_ROW,
    DPI,
    END,
    END_GAP,
    END_SIGN,
    END_W,
    FAMILY_ROW,
    FONT,
    FRAME,
    GAP,
    INK,
    KEY_PATCH,
    MARGIN,
    MUTED,
    NOTE_ROW,
    OVERLAY_ROW,
    PAPER,
    RULE,
    SWATCH_ROW,
    TITLE_FONT,
    TITLE_H,
    TOP,
    WIDTH,
    BarBox,
    ClassesBlock,
    LegendLayout,
    OverlaysBlock,
    RampsBlock,
    legend_layout,
    pretty_name,
    ramp_marks,
    ramp_of,
    rgb01,
)
from compose.style.kinds import LAYER_KINDS

__all__ = ["write_legend", "legend_png", "legend_figure", "draw_legend", "legend_layout",
           "LegendLayout", "BarBox",
           "pretty_name", "DPI", "WIDTH"]


# --- drawing ---------------------------------------------------------------------------------

def _text(ax, x: float, y: float, s: str, **kw):
    """``ax.text`` of the legend's words as written: a "$" in a title, unit or class label is a
    dollar, never the start of mathtext."""
    return ax.text(x, y, s, parse_math=False, **kw)


#: the least room (inches) between two axis labels (common practice, no source: about 3 pt)
TICK_GAP = 0.04


def _label_half(text: str) -> float:
    """Half the width (inches) of an axis label as the renderer sets it (FONT - 0.6 pt)."""
    from compose.layers.label_text import text_width

    return text_width(text, FONT - 0.6) / 72.0 / 2.0


def _apart(ticks: list[tuple[float, str]]) -> bool:
    """Whether the labels of ``ticks`` (sorted by x) keep :data:`TICK_GAP` from each other."""
    halves = [_label_half(t) for _, t in ticks]
    return all(b[0] - hb - (a[0] + ha) >= TICK_GAP
               for a, b, ha, hb in zip(ticks, ticks[1:], halves, halves[1:]))


def _ticks(block: RampsBlock, values: np.ndarray, xs: np.ndarray) -> list[tuple[float, str]]:
    """(x inches, label) of the axis under a colour-bar block. Labels that would touch a
    neighbour are left out: a stepped bar labels every k-th class edge (the smallest k that
    keeps them apart; both ends always), a continuous one drops the round values that crowd its
    ends or marks."""
    lut = block.layers[0].lut
    span = xs[-1] - xs[0]
    if lut.stepped and len(values) > 2:
        edges = list(values)
        last = len(edges) - 1
        at = [(float(np.interp(e, values, xs)), block.fmt(e)) for e in edges]
        for step in range(max(1, int(np.ceil(last / 9))), last + 1):
            keep = list(range(0, last + 1, step))
            if keep[-1] != last:            # the last edge replaces a kept one too close to it
                keep.append(last)
                if len(keep) > 2 and not _apart([at[keep[-2]], at[last]]):
                    del keep[-2]
            if _apart([at[i] for i in keep]):
                break
        return [at[i] for i in keep]
    from matplotlib.ticker import MaxNLocator
    lo, hi = float(values[0]), float(values[-1])
    nice = [v for v in MaxNLocator(nbins=5, steps=[1, 2, 2.5, 5, 10]).tick_values(lo, hi)
            if lo - 1e-9 * abs(hi - lo) <= v <= hi + 1e-9 * abs(hi - lo)]
    fixed = [lo, hi] + [v for v, _ in ramp_marks(ramp_of(block.layers[0]))]
    close = 0.1 * (hi - lo)
    ticks = sorted(set(fixed) | {v for v in nice if all(abs(v - f) >= close for f in fixed)})
    if span <= 0:
        return []
    at = [(float(np.interp(v, values, xs)), block.fmt(v)) for v in ticks]
    kept = [t for v, t in zip(ticks, at) if v in fixed]
    for v, t in zip(ticks, at):             # round values in order, each only where it has room
        if v in fixed:
            continue
        row = sorted(kept + [t])
        i = row.index(t)
        if _apart(row[max(0, i - 1):i + 2]):
            kept.append(t)
    return sorted(kept)


def _bar_image(lut, box: BarBox) -> np.ndarray:
    """(1, n, 3) uint8: the colour drawn at each pixel column centre of the bar."""
    n = max(2, int(round(box.x1 - box.x0)))
    cols = box.x0 + (np.arange(n) + 0.5) * (box.x1 - box.x0) / n
    values = np.interp(cols, box.xs, box.values)
    if lut.stepped and len(box.xs) == lut.n + 1:   # equal-width blocks, one class each
        k = np.clip(np.searchsorted(np.asarray(box.xs), cols, side="right") - 1, 0, lut.n - 1)
        return np.asarray(lut.rgb8)[k][None]
    return np.asarray(lut.rgb8)[lut.index(values)][None]


def _draw_ramps(ax, b: RampsBlock, y: float, boxes: list[BarBox]) -> None:
    from matplotlib.patches import Rectangle

    _text(ax, MARGIN, y + TITLE_H * 0.42, b.title, fontsize=TITLE_FONT, weight="bold", color=INK,
            va="center", ha="left")
    ramp = ramp_of(b.layers[0])
    marks = ramp_marks(ramp, b.fmt)
    mine = [bx for bx in boxes if bx.layer in {la.spec.name for la in b.layers}]
    x0, x1 = mine[0].x0 / DPI, mine[0].x1 / DPI
    values, xs = np.array(mine[0].values), np.array(mine[0].xs) / DPI
    for layer, label, box in zip(b.layers, b.labels, mine):
        top, bottom = box.y0 / DPI, box.y1 / DPI
        img = _bar_image(layer.lut, box)
        if b.seen is not None:         # stripes: lit slope, flat ground, shaded slope (those shown)
            img = np.round(b.seen(img[0] / 255.0).transpose(1, 0, 2) * 255).astype(np.uint8)
        ax.imshow(img, extent=(x0, x1, bottom, top), aspect="auto", interpolation="nearest",
                  zorder=1)
        lut = layer.lut
        mid = (top + bottom) / 2
        # out-of-domain colours: a separate square at each end, a sign on its outer side
        for index, left, sign, side in ((lut.outside_low_index, x0 - END_GAP - END_W, "<", -1),
                                        (lut.outside_high_index, x1 + END_GAP, ">", 1)):
            _swatch(ax, left, top, END_W, bottom - top, np.asarray(lut.rgb8[index]) / 255, b.seen,
                    zorder=2)
            _text(ax, left + END_W / 2 + side * (END_W / 2 + 0.035), mid, sign, fontsize=FONT - 0.6,
                    color=MUTED, ha="center", va="center")
        ax.add_patch(Rectangle((x0, top), x1 - x0, bottom - top, fill=False, edgecolor=FRAME,
                               lw=0.4, zorder=3))
        if label:
            _text(ax, x0 - END - 0.05, mid, label, fontsize=FONT, color=INK, ha="right",
                    va="center")
    bar_top, bar_bottom = mine[0].y0 / DPI, mine[-1].y1 / DPI
    if b.layers[0].lut.stepped and len(xs) > 2:   # class boundaries as hairlines between the blocks
        for x in xs[1:-1]:
            ax.plot([x, x], [bar_top, bar_bottom], color=PAPER, lw=0.5, zorder=2.5)
    for x, text in _ticks(b, values, xs):
        ax.plot([x, x], [bar_bottom, bar_bottom + 0.045], color=FRAME, lw=0.5)
        _text(ax, x, bar_bottom + 0.065, text, fontsize=FONT - 0.6, color=INK, ha="center", va="top")
    for value, text in marks:
        x = float(np.interp(value, values, xs))
        # marked above and below the bars, never across them: the colours there are the message
        ax.plot([x, x], [bar_bottom, bar_bottom + 0.06], color=INK, lw=0.9, zorder=4,
                solid_capstyle="butt")
        ax.plot([x], [bar_top - 0.045], marker="v", ms=3.6, color=INK, zorder=4)
        _text(ax, x, bar_top - 0.085, text, fontsize=FONT - 1, color=INK, ha="center", va="bottom")
    y_sw = bar_bottom + AXIS_H
    _draw_swatches(ax, b.swatches, x0 - END + END_SIGN, y_sw, b.seen)
    if b.seen is not None:
        _text(ax, x0 - END + END_SIGN, y_sw + (SWATCH_ROW if b.swatches else 0.0) + NOTE_ROW * 0.45,
                b.note, fontsize=FONT - 1.4, style="italic", color=MUTED, va="center")


def _swatch(ax, x: float, y: float, w: float, h: float, rgb, seen=None, zorder: float = 1.0
            ) -> None:
    """A framed colour patch; with ``seen`` (a shaded key) its stripes, top to bottom the colour
    on a lit slope, on flat ground and on a shaded slope (those the key shows,
    :func:`compose.output.legend_layout.visible_tones`)."""
    from matplotlib.patches import Rectangle

    if seen is None:
        ax.add_patch(Rectangle((x, y), w, h, facecolor=tuple(rgb), edgecolor=FRAME, lw=0.4,
                               zorder=zorder))
        return
    tones = seen(np.array([rgb]))[0]
    for k, tone in enumerate(tones):     # each from its top to the bottom, over the one above:
        # Agg snaps each patch to whole pixels, so stripes cut at a fractional row would leave
        # a row of paper between them
        top = y + k * h / len(tones)
        ax.add_patch(Rectangle((x, top), w, y + h - top, facecolor=tuple(tone),
                               edgecolor="none", lw=0, zorder=zorder))
    ax.add_patch(Rectangle((x, y), w, h, fill=False, edgecolor=FRAME, lw=0.4, zorder=zorder))


def _draw_swatches(ax, swatches, x: float, y: float, seen=None) -> None:
    for label, rgb8 in swatches:
        _swatch(ax, x, y + 0.03, 0.3, 0.145, np.asarray(rgb8) / 255, seen)
        _text(ax, x + 0.38, y + 0.1, label, fontsize=FONT, color=INK, va="center")
        x += 0.38 + 0.075 * len(label) + 0.25


def _draw_classes(ax, b: ClassesBlock, y: float, width: float = WIDTH) -> None:

    _text(ax, MARGIN, y + TITLE_H * 0.42, b.title, fontsize=TITLE_FONT, weight="bold", color=INK,
            va="center")
    indent = MARGIN + (0.12 if any(k == "family" for k, _ in b.rows) else 0.0)
    columns = b.columns or [b.rows]
    step = (width - MARGIN - indent) / len(columns)
    bottom = y + TITLE_H
    for c, rows in enumerate(columns):
        yy = y + TITLE_H
        x = indent + c * step
        for kind, item in rows:
            if kind == "family":
                _text(ax, x - (indent - MARGIN), yy + FAMILY_ROW * 0.55, pretty_name(item),
                        fontsize=FONT - 0.4, style="italic", color=MUTED, va="center")
                yy += FAMILY_ROW
                continue
            _swatch(ax, x, yy + 0.03, 0.3, 0.145, rgb01(item.rgb), b.seen)
            _text(ax, x + 0.38, yy + 0.1, item.label or b.fmt(item.value), fontsize=FONT,
                    color=INK, va="center")
            yy += CLASS_ROW
        bottom = max(bottom, yy)
    yy = bottom
    _draw_swatches(ax, b.swatches, indent, yy + 0.04, b.seen)
    if b.seen is not None:
        yy += (SWATCH_ROW + 0.04 if b.swatches else 0.0) + 0.04
        _text(ax, indent, yy + NOTE_ROW * 0.45, b.note, fontsize=FONT - 1.4, style="italic",
                color=MUTED, va="center")


def _draw_overlays(ax, b: OverlaysBlock, y: float, width: float = WIDTH,
                   key_patch=KEY_PATCH) -> None:
    from matplotlib.patches import Rectangle
    from matplotlib.patheffects import withStroke

    ax.plot([MARGIN, width - MARGIN], [y - GAP / 2, y - GAP / 2], color=RULE, lw=0.5)
    for i, layer in enumerate(b.layers):
        o = layer.spec.options
        kind = LAYER_KINDS[layer.spec.kind].legend      # how its kind shows: line, area, ...
        cy = y + i * OVERLAY_ROW + OVERLAY_ROW / 2
        sx0, sx1 = MARGIN + 0.02, MARGIN + 0.46
        alpha = float(layer.spec.opacity)
        # samples sit on a mid-light neutral key patch, so light halos and rings show as on a map
        ax.add_patch(Rectangle((MARGIN - 0.02, cy - 0.085), 0.52, 0.17, facecolor=key_patch,
                               edgecolor="none", zorder=0))
        if kind == "line":
            if o.halo is not None:
                ax.plot([sx0, sx1], [cy, cy], color=rgb01(o.halo.color), lw=o.halo.width,
                        solid_capstyle="butt", alpha=alpha)
            dash = getattr(o, "dash", None)
            ls = "-" if not dash else (0, tuple(d / o.width for d in dash))
            ax.plot([sx0, sx1], [cy, cy], color=rgb01(o.stroke), lw=o.width, linestyle=ls,
                    solid_capstyle="butt", dash_capstyle="butt", alpha=alpha)
        elif kind == "area":
            face = rgb01(o.fill) if o.fill is not None else "none"
            if o.halo is not None and o.width > 0:
                ax.add_patch(Rectangle((sx0 + 0.04, cy - 0.07), 0.36, 0.14, fill=False,
                                       edgecolor=rgb01(o.halo.color), lw=o.halo.width, alpha=alpha))
            ax.add_patch(Rectangle((sx0 + 0.04, cy - 0.07), 0.36, 0.14, facecolor=face,
                                   edgecolor=rgb01(o.stroke) if o.width > 0 else "none",
                                   lw=o.width, alpha=alpha))
        elif kind == "marker":
            marker = "o" if o.shape == "circle" else "s"
            cx = (sx0 + sx1) / 2
            if o.width:
                ax.plot([cx], [cy], marker=marker, ms=o.size + 2 * o.width, color=rgb01(o.stroke),
                        mec="none", alpha=alpha)
            ax.plot([cx], [cy], marker=marker, ms=o.size, color=rgb01(o.fill), mec="none",
                    alpha=alpha)
        elif kind == "text":
            effects = ([withStroke(linewidth=o.halo.width, foreground=rgb01(o.halo.color))]
                       if o.halo is not None else [])
            _text(ax, (sx0 + sx1) / 2, cy, "Abc", fontsize=min(o.size, 11), color=rgb01(o.color),
                    family=o.font, weight=o.weight, ha="center", va="center",
                    path_effects=effects, alpha=alpha)
        _text(ax, MARGIN + 0.58, cy, pretty_name(layer.spec.name), fontsize=FONT, color=INK,
                va="center")


def draw_legend(ax, layout: LegendLayout, key_patch=KEY_PATCH) -> None:
    """Draw the legend of ``layout`` into ``ax``, whose data coordinates must be inches from the
    legend's top-left corner (x right, y down) over ``layout.width`` x ``layout.height``.
    ``key_patch``: the colour behind overlay samples."""
    ax.set_axis_off()
    ax.set_autoscale_on(False)
    y = TOP
    boxes = list(layout.bars)
    for b in layout.blocks:
        if isinstance(b, RampsBlock):
            _draw_ramps(ax, b, y, boxes)
        elif isinstance(b, ClassesBlock):
            _draw_classes(ax, b, y, layout.width)
        else:
            _draw_overlays(ax, b, y, layout.width, key_patch)
        y += b.height + GAP
    if not layout.blocks:
        _text(ax, MARGIN, TOP + 0.15, "no legend entries", fontsize=FONT, color=MUTED, va="center")
    ax.set_xlim(0, layout.width)
    ax.set_ylim(layout.height, 0)


def legend_figure(style, ramps, layers, nodata_seen: set[str] | None = None):
    """The legend as a matplotlib Figure (and its :class:`LegendLayout`); ``nodata_seen``: see
    :func:`legend_layout`."""
    from matplotlib.figure import Figure

    layout = legend_layout(style, ramps, layers, nodata_seen=nodata_seen)
    fig = Figure(figsize=(layout.width, layout.height), dpi=DPI, facecolor=PAPER)
    ax = fig.add_axes((0, 0, 1, 1))
    draw_legend(ax, layout)
    return fig, layout


def legend_png(style, ramps, layers, nodata_seen: set[str] | None = None) -> bytes:
    """The legend of the drawn ``layers`` (``Prepared.layers``) as PNG bytes.

    ``ramps``: the built ramps by name (the layers carry their own); ``style``: the loaded style;
    ``nodata_seen``: the layers with no-data pixels on the map (only they get a no-data swatch;
    None: every layer that draws one).
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    from compose.page.encode import png_bytes

    fig, _ = legend_figure(style, ramps, layers, nodata_seen)
    fig.set_facecolor(PAPER)
    agg = FigureCanvasAgg(fig)
    agg.draw()
    # the pixels matplotlib's PNG writer saves, in the page writers' faster PNG encoding
    # (Up filter, ISA-L): the demo's legend PNG 0.19 -> 0.15 s CPU in all, 49 -> 56 kB, measured here
    return png_bytes(np.asarray(agg.buffer_rgba()), dpi=DPI)


def write_legend(path: Path, style, ramps, layers) -> None:
    """Write the legend (:func:`legend_png`) as a PNG at ``path`` (the caller renames it into
    place)."""
    from compose.page.dates import dated_png

    Path(path).write_bytes(dated_png(legend_png(style, ramps, layers)))
