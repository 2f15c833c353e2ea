"""NAME.legend.png: the map's legend, drawn with matplotlib's Agg renderer (object interface only).

Blocks, top to bottom in style order:

* **colour bars** for every raster layer drawn through a continuous or stepped ramp, in data
  units. Continuous ramps are drawn column by column from the layer's lookup table (the colours
  the map has, not a re-interpolation); stepped ramps as equal-width blocks with their breaks
  labelled; under / over as end triangles; the threshold break and the diverging centre are
  marked above the bar; the no-data colour as a labelled swatch (left out when no-data is
  transparent). Layers whose ramps are twins (or share a ramp) are stacked on one shared data
  scale with a single axis, so equal values can be compared across them at a glance.
* **class swatches** for ``classes`` layers, grouped under their family names.
* **overlay samples**: a short line, area, marker or text sample drawn with the layer's own
  widths (points), dashes and halo, on a light neutral key patch so light halos show.

The style has no units key: each block is titled with its layer name, prettified
(``"land-productivity"`` -> "Land productivity"). :func:`legend_layout` gives the geometry of
the figure in pixels (tests sample the bars of the written PNG through it).
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

__all__ = ["write_legend", "legend_figure", "legend_layout", "LegendLayout", "BarBox",
           "pretty_name", "DPI", "WIDTH"]

DPI = 200                 # pixels per inch of the PNG
WIDTH = 3.6               # inches
MARGIN = 0.2              # left and right margin, inches
INK = "#262626"
MUTED = "#6b6b6b"
FRAME = "#7d7d7d"
KEY_PATCH = "#d3d1ca"     # behind overlay samples: neutral, L* about 84
FONT = 8.0                # points
TITLE_FONT = 8.6

# vertical sizes, inches
TOP, BOTTOM, GAP = 0.16, 0.14, 0.2
TITLE_H, MARK_H, BAR_H, BAR_GAP, AXIS_H, SWATCH_ROW = 0.24, 0.17, 0.19, 0.05, 0.27, 0.22
CLASS_ROW, FAMILY_ROW, OVERLAY_ROW = 0.205, 0.2, 0.235
TRIANGLE = 0.13           # width of an under / over end triangle, inches


def pretty_name(name: str) -> str:
    """``"land-productivity"`` -> ``"Land productivity"`` (dashes, underscores -> spaces)."""
    words = [w for w in re.split(r"[-_\s]+", name) if w]
    text = " ".join(words)
    return text[:1].upper() + text[1:] if text else name


def _fmt(v: float) -> str:
    """A tick label: at most 4 significant digits, typographic minus."""
    if v == 0:
        return "0"
    text = f"{v:.4g}" if abs(v) < 1e5 else f"{v:.3g}"
    if "e" not in text and "." in text:
        text = text.rstrip("0").rstrip(".")
    return text.replace("-", "\u2212")


def _hex(rgb8) -> str:
    return "#%02x%02x%02x" % tuple(int(c) for c in rgb8)


def _rgb(color) -> tuple[float, float, float]:
    return tuple(float(np.clip(c, 0.0, 1.0)) for c in color)


# --- layout ----------------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class BarBox:
    """Where one layer's colour bar lies in the PNG: pixel box (x0, x1 columns, y0, y1 rows from
    the top; the bar proper, without its end triangles) and the data value -> x mapping, a
    piecewise-linear map through ``values`` (data, increasing) and ``xs`` (pixels)."""

    layer: str
    x0: float
    x1: float
    y0: float
    y1: float
    values: tuple[float, ...]
    xs: tuple[float, ...]

    def x_of(self, value) -> np.ndarray:
        """Pixel column (float) of data ``value`` on the bar."""
        return np.interp(value, self.values, self.xs)


@dataclass
class _Ramps:
    """One colour-bar block: layers sharing one data scale."""

    layers: list
    title: str
    labels: list[str]
    height: float = 0.0


@dataclass
class _Classes:
    layer: object
    title: str
    rows: list[tuple[str, object]] = field(default_factory=list)   # ("family", name) | ("class", c)
    height: float = 0.0


@dataclass
class _Overlays:
    layers: list
    height: float = 0.0


@dataclass(frozen=True, slots=True)
class LegendLayout:
    """The legend's size (inches, at :data:`DPI`) and its colour bars' boxes in PNG pixels."""

    width: float
    height: float
    dpi: int
    bars: tuple[BarBox, ...]
    blocks: tuple = ()

    @property
    def pixels(self) -> tuple[int, int]:
        """(width, height) of the PNG in pixels."""
        return int(round(self.width * self.dpi)), int(round(self.height * self.dpi))


def _ramp_of(layer):
    return getattr(layer, "ramp", None)


def _group_key(layer) -> frozenset:
    ramp = _ramp_of(layer)
    return frozenset((ramp.name,) + tuple(ramp.matched))


def _titles(names: list[str]) -> tuple[str, list[str]]:
    """Block title and bar labels of layers on one scale: a shared first or last word becomes
    the title ("land-productivity", "water-productivity" -> "Productivity": "Land", "Water")."""
    if len(names) == 1:
        return pretty_name(names[0]), [""]
    words = [[w for w in re.split(r"[-_\s]+", n) if w] for n in names]
    for end in (-1, 0):
        common = {tuple(w[end:] if end == -1 else w[:1]) for w in words}
        if len(common) == 1 and all(len(w) > 1 for w in words):
            shared = " ".join(next(iter(common)))
            rest = [" ".join(w[:-1] if end == -1 else w[1:]) for w in words]
            if len(set(rest)) == len(rest):
                return pretty_name(shared), [pretty_name(r) for r in rest]
    return " / ".join(pretty_name(n) for n in names), [pretty_name(n) for n in names]


def _nodata_swatches(layers) -> list[tuple[str, np.ndarray]]:
    """(label, rgb8) of the no-data colours drawn by these layers (transparent ones left out)."""
    out: list[tuple[str, np.ndarray]] = []
    for layer in layers:
        if getattr(layer, "transparent_nodata", False):
            continue
        pal = getattr(layer, "palette", None)
        if pal is None or pal.nodata < 0:
            continue
        rgb8 = np.asarray(pal.rgb8[pal.nodata])
        if any(np.array_equal(rgb8, c) for _, c in out):
            continue
        out.append((layer.spec.name, rgb8))
    if len(out) > 1:
        return [(f"no data ({pretty_name(n)})", c) for n, c in out]
    return [("no data", c) for _, c in out]


def _marks(ramp) -> list[tuple[float, str]]:
    marks = []
    if ramp.kind == "threshold" and ramp.at is not None:
        marks.append((float(ramp.at), f"threshold {_fmt(ramp.at)}"))
    if ramp.kind == "diverging" and ramp.center is not None:
        marks.append((float(ramp.center), f"centre {_fmt(ramp.center)}"))
    return marks


def _blocks(layers) -> list:
    """Legend blocks in style order: colour-bar groups, class lists, then the overlays."""
    blocks: list = []
    groups: dict[frozenset, _Ramps] = {}
    overlays = []
    for layer in layers:
        spec = layer.spec
        ramp = _ramp_of(layer)
        if spec.kind in ("lines", "areas", "points", "labels"):
            overlays.append(layer)
        elif ramp is not None and ramp.kind == "qualitative":
            blocks.append(_Classes(layer, pretty_name(spec.name)))
        elif ramp is not None and getattr(layer, "lut", None) is not None:
            key = _group_key(layer)
            hit = next((g for k, g in groups.items() if k & key), None)
            if hit is None:
                hit = groups[key] = _Ramps([], "", [])
                blocks.append(hit)
            hit.layers.append(layer)
    for b in blocks:
        if isinstance(b, _Ramps):
            b.title, b.labels = _titles([la.spec.name for la in b.layers])
            marks = _marks(_ramp_of(b.layers[0]))
            n = len(b.layers)
            swatches = _nodata_swatches(b.layers)
            b.height = (TITLE_H + (MARK_H if marks else 0.04) + n * BAR_H + (n - 1) * BAR_GAP
                        + AXIS_H + (SWATCH_ROW if swatches else 0.0))
        else:
            ramp = _ramp_of(b.layer)
            families: list[str] = []
            for c in ramp.classes:
                if c.family and c.family not in families:
                    families.append(c.family)
            for fam in families:
                b.rows.append(("family", fam))
                b.rows += [("class", c) for c in ramp.classes if c.family == fam]
            loose = [c for c in ramp.classes if not c.family]
            if loose and families:
                b.rows.append(("family", "other"))
            b.rows += [("class", c) for c in loose]
            swatches = _nodata_swatches([b.layer])
            b.height = (TITLE_H + sum(FAMILY_ROW if k == "family" else CLASS_ROW for k, _ in b.rows)
                        + (SWATCH_ROW + 0.04 if swatches else 0.0) + 0.04)
    if overlays:
        blocks.append(_Overlays(overlays, height=len(overlays) * OVERLAY_ROW + 0.04))
    return blocks


def _bar_geometry(block: _Ramps) -> tuple[float, float, float]:
    """(left of the bar labels column, x0, x1) of a colour-bar block, inches."""
    width = max((len(t) for t in block.labels), default=0)
    label_w = 0.0 if width == 0 else min(1.3, 0.14 + 0.068 * width)
    x0 = MARGIN + label_w + TRIANGLE
    x1 = WIDTH - MARGIN - TRIANGLE
    return MARGIN, x0, x1


def _scale(lut, x0: float, x1: float) -> tuple[np.ndarray, np.ndarray]:
    """(values, xs) of the data -> position map: linear for continuous ramps, equal-width
    classes for stepped ones (breaks at evenly spaced positions)."""
    edges = np.asarray(lut.edges, dtype=float)
    if lut.stepped:
        return edges, np.linspace(x0, x1, len(edges))
    return np.array([edges[0], edges[-1]]), np.array([x0, x1])


def _shared_scale(block: _Ramps, x0, x1) -> tuple[np.ndarray, np.ndarray]:
    """One scale for every bar of the block: the first layer's, unless their stepped edges differ
    (then a linear data scale over the union of the domains)."""
    luts = [la.lut for la in block.layers]
    first = _scale(luts[0], x0, x1)
    if all(np.array_equal(_scale(lut, x0, x1)[0], first[0]) for lut in luts[1:]):
        return first
    lo = min(float(lut.edges[0]) for lut in luts)
    hi = max(float(lut.edges[-1]) for lut in luts)
    return np.array([lo, hi]), np.array([x0, x1])


def legend_layout(style, ramps, layers) -> LegendLayout:
    """The legend's size and bar boxes (see :class:`LegendLayout`) without drawing it."""
    blocks = _blocks(layers)
    height = TOP + sum(b.height for b in blocks) + GAP * max(0, len(blocks) - 1) + BOTTOM
    if not blocks:
        height = TOP + 0.3 + BOTTOM
    bars = []
    y = TOP
    for b in blocks:
        if isinstance(b, _Ramps):
            _, x0, x1 = _bar_geometry(b)
            values, xs = _shared_scale(b, x0, x1)
            marks = _marks(_ramp_of(b.layers[0]))
            top = y + TITLE_H + (MARK_H if marks else 0.04)
            for i, layer in enumerate(b.layers):
                by = top + i * (BAR_H + BAR_GAP)
                bars.append(BarBox(layer.spec.name, x0 * DPI, x1 * DPI, by * DPI, (by + BAR_H) * DPI,
                                   tuple(float(v) for v in values),
                                   tuple(float(x) * DPI for x in xs)))
        y += b.height + GAP
    return LegendLayout(WIDTH, height, DPI, tuple(bars), tuple(blocks))


# --- drawing ---------------------------------------------------------------------------------

def _ticks(block: _Ramps, values: np.ndarray, xs: np.ndarray) -> list[tuple[float, str]]:
    """(x inches, label) of the axis under a colour-bar block."""
    lut = block.layers[0].lut
    span = xs[-1] - xs[0]
    if lut.stepped and len(values) > 2:
        edges = list(values)
        step = max(1, int(np.ceil((len(edges) - 1) / 9)))
        keep = sorted(set(range(0, len(edges), step)) | {len(edges) - 1})
        return [(float(np.interp(edges[i], values, xs)), _fmt(edges[i])) for i in keep]
    from matplotlib.ticker import MaxNLocator
    lo, hi = float(values[0]), float(values[-1])
    nice = [v for v in MaxNLocator(nbins=5, steps=[1, 2, 2.5, 5, 10]).tick_values(lo, hi)
            if lo - 1e-9 * abs(hi - lo) <= v <= hi + 1e-9 * abs(hi - lo)]
    fixed = [lo, hi] + [v for v, _ in _marks(_ramp_of(block.layers[0]))]
    close = 0.1 * (hi - lo)
    ticks = sorted(set(fixed) | {v for v in nice if all(abs(v - f) >= close for f in fixed)})
    return [(float(np.interp(v, values, xs)), _fmt(v)) for v in ticks] if span > 0 else []


def _bar_image(lut, box: BarBox) -> np.ndarray:
    """(1, n, 3) uint8: the colour drawn at each pixel column centre of the bar."""
    n = max(2, int(round(box.x1 - box.x0)))
    cols = box.x0 + (np.arange(n) + 0.5) * (box.x1 - box.x0) / n
    values = np.interp(cols, box.xs, box.values)
    if lut.stepped and len(box.xs) == lut.n + 1:   # equal-width blocks, one class each
        k = np.clip(np.searchsorted(np.asarray(box.xs), cols, side="right") - 1, 0, lut.n - 1)
        return np.asarray(lut.rgb8)[k][None]
    return np.asarray(lut.rgb8)[lut.index(values)][None]


def _draw_ramps(ax, b: _Ramps, y: float, boxes: list[BarBox]) -> None:
    from matplotlib.patches import Polygon, Rectangle

    ax.text(MARGIN, y + TITLE_H * 0.42, b.title, fontsize=TITLE_FONT, weight="bold", color=INK,
            va="center", ha="left")
    ramp = _ramp_of(b.layers[0])
    marks = _marks(ramp)
    mine = [bx for bx in boxes if bx.layer in {la.spec.name for la in b.layers}]
    x0, x1 = mine[0].x0 / DPI, mine[0].x1 / DPI
    values, xs = np.array(mine[0].values), np.array(mine[0].xs) / DPI
    for layer, label, box in zip(b.layers, b.labels, mine):
        top, bottom = box.y0 / DPI, box.y1 / DPI
        img = _bar_image(layer.lut, box)
        ax.imshow(img, extent=(x0, x1, bottom, top), aspect="auto", interpolation="nearest",
                  zorder=1)
        lut = layer.lut
        under, over = np.asarray(lut.rgb8[lut.under_index]) / 255, np.asarray(lut.rgb8[lut.over_index]) / 255
        mid = (top + bottom) / 2
        ax.add_patch(Polygon([(x0, top), (x0 - TRIANGLE, mid), (x0, bottom)], closed=True,
                             facecolor=under, edgecolor=FRAME, lw=0.4, zorder=2))
        ax.add_patch(Polygon([(x1, top), (x1 + TRIANGLE, mid), (x1, bottom)], closed=True,
                             facecolor=over, edgecolor=FRAME, lw=0.4, zorder=2))
        ax.add_patch(Rectangle((x0, top), x1 - x0, bottom - top, fill=False, edgecolor=FRAME,
                               lw=0.4, zorder=3))
        if label:
            ax.text(x0 - TRIANGLE - 0.06, mid, label, fontsize=FONT, color=INK, ha="right",
                    va="center")
    bar_top, bar_bottom = mine[0].y0 / DPI, mine[-1].y1 / DPI
    if b.layers[0].lut.stepped and len(xs) > 2:   # class boundaries as hairlines between the blocks
        for x in xs[1:-1]:
            ax.plot([x, x], [bar_top, bar_bottom], color="white", lw=0.5, zorder=2.5)
    for x, text in _ticks(b, values, xs):
        ax.plot([x, x], [bar_bottom, bar_bottom + 0.045], color=FRAME, lw=0.5)
        ax.text(x, bar_bottom + 0.065, text, fontsize=FONT - 0.6, color=INK, ha="center", va="top")
    for value, text in marks:
        x = float(np.interp(value, values, xs))
        # marked above and below the bars, never across them: the colours there are the message
        ax.plot([x, x], [bar_bottom, bar_bottom + 0.06], color=INK, lw=0.9, zorder=4,
                solid_capstyle="butt")
        ax.plot([x], [bar_top - 0.045], marker="v", ms=3.6, color=INK, zorder=4)
        ax.text(x, bar_top - 0.085, text, fontsize=FONT - 1, color=INK, ha="center", va="bottom")
    y_sw = bar_bottom + AXIS_H
    _draw_swatches(ax, _nodata_swatches(b.layers), x0 - TRIANGLE, y_sw)


def _draw_swatches(ax, swatches, x: float, y: float) -> None:
    from matplotlib.patches import Rectangle

    for label, rgb8 in swatches:
        ax.add_patch(Rectangle((x, y + 0.03), 0.3, 0.145, facecolor=np.asarray(rgb8) / 255,
                               edgecolor=FRAME, lw=0.4))
        ax.text(x + 0.38, y + 0.1, label, fontsize=FONT, color=INK, va="center")
        x += 0.38 + 0.075 * len(label) + 0.25


def _draw_classes(ax, b: _Classes, y: float) -> None:
    from matplotlib.patches import Rectangle

    ax.text(MARGIN, y + TITLE_H * 0.42, b.title, fontsize=TITLE_FONT, weight="bold", color=INK,
            va="center")
    yy = y + TITLE_H
    indent = MARGIN + (0.12 if any(k == "family" for k, _ in b.rows) else 0.0)
    for kind, item in b.rows:
        if kind == "family":
            ax.text(MARGIN, yy + FAMILY_ROW * 0.55, pretty_name(item), fontsize=FONT - 0.4,
                    style="italic", color=MUTED, va="center")
            yy += FAMILY_ROW
            continue
        ax.add_patch(Rectangle((indent, yy + 0.03), 0.3, 0.145, facecolor=_rgb(item.rgb),
                               edgecolor=FRAME, lw=0.4))
        ax.text(indent + 0.38, yy + 0.1, item.label or _fmt(item.value), fontsize=FONT,
                color=INK, va="center")
        yy += CLASS_ROW
    _draw_swatches(ax, _nodata_swatches([b.layer]), indent, yy + 0.04)


def _draw_overlays(ax, b: _Overlays, y: float) -> None:
    from matplotlib.patches import Rectangle
    from matplotlib.patheffects import withStroke

    ax.plot([MARGIN, WIDTH - MARGIN], [y - GAP / 2, y - GAP / 2], color="#d9d9d9", lw=0.5)
    for i, layer in enumerate(b.layers):
        o = layer.spec.options
        kind = layer.spec.kind
        cy = y + i * OVERLAY_ROW + OVERLAY_ROW / 2
        sx0, sx1 = MARGIN + 0.02, MARGIN + 0.46
        alpha = float(layer.spec.opacity)
        # samples sit on a mid-light neutral key patch, so light halos and rings show as on a map
        ax.add_patch(Rectangle((MARGIN - 0.02, cy - 0.085), 0.52, 0.17, facecolor=KEY_PATCH,
                               edgecolor="none", zorder=0))
        if kind == "lines":
            if o.halo is not None:
                ax.plot([sx0, sx1], [cy, cy], color=_rgb(o.halo.color), lw=o.halo.width,
                        solid_capstyle="butt", alpha=alpha)
            ls = "-" if not o.dash else (0, tuple(d / o.width for d in o.dash))
            ax.plot([sx0, sx1], [cy, cy], color=_rgb(o.stroke), lw=o.width, linestyle=ls,
                    solid_capstyle="butt", dash_capstyle="butt", alpha=alpha)
        elif kind == "areas":
            face = _rgb(o.fill) if o.fill is not None else "none"
            if o.halo is not None and o.width > 0:
                ax.add_patch(Rectangle((sx0 + 0.04, cy - 0.07), 0.36, 0.14, fill=False,
                                       edgecolor=_rgb(o.halo.color), lw=o.halo.width, alpha=alpha))
            ax.add_patch(Rectangle((sx0 + 0.04, cy - 0.07), 0.36, 0.14, facecolor=face,
                                   edgecolor=_rgb(o.stroke) if o.width > 0 else "none",
                                   lw=o.width, alpha=alpha))
        elif kind == "points":
            marker = "o" if o.shape == "circle" else "s"
            cx = (sx0 + sx1) / 2
            if o.width:
                ax.plot([cx], [cy], marker=marker, ms=o.size + 2 * o.width, color=_rgb(o.stroke),
                        mec="none", alpha=alpha)
            ax.plot([cx], [cy], marker=marker, ms=o.size, color=_rgb(o.fill), mec="none",
                    alpha=alpha)
        elif kind == "labels":
            effects = ([withStroke(linewidth=o.halo.width, foreground=_rgb(o.halo.color))]
                       if o.halo is not None else [])
            ax.text((sx0 + sx1) / 2, cy, "Abc", fontsize=min(o.size, 11), color=_rgb(o.color),
                    family=o.font, weight=o.weight, ha="center", va="center",
                    path_effects=effects, alpha=alpha)
        ax.text(MARGIN + 0.58, cy, pretty_name(layer.spec.name), fontsize=FONT, color=INK,
                va="center")


def legend_figure(style, ramps, layers):
    """The legend as a matplotlib Figure (and its :class:`LegendLayout`)."""
    from matplotlib.figure import Figure

    layout = legend_layout(style, ramps, layers)
    fig = Figure(figsize=(layout.width, layout.height), dpi=DPI, facecolor="white")
    ax = fig.add_axes((0, 0, 1, 1))
    ax.set_axis_off()
    ax.set_autoscale_on(False)
    y = TOP
    boxes = list(layout.bars)
    for b in layout.blocks:
        if isinstance(b, _Ramps):
            _draw_ramps(ax, b, y, boxes)
        elif isinstance(b, _Classes):
            _draw_classes(ax, b, y)
        else:
            _draw_overlays(ax, b, y)
        y += b.height + GAP
    if not layout.blocks:
        ax.text(MARGIN, TOP + 0.15, "no legend entries", fontsize=FONT, color=MUTED, va="center")
    ax.set_xlim(0, layout.width)
    ax.set_ylim(layout.height, 0)
    return fig, layout


def write_legend(path: Path, style, ramps, layers) -> None:
    """Write the legend of the drawn ``layers`` (``RenderRun.layers``) as a PNG at ``path``.

    ``ramps``: the built ramps by name (the layers carry their own); ``style``: the loaded style.
    The file is written where given (the caller renames it into place).
    """
    fig, _ = legend_figure(style, ramps, layers)
    fig.savefig(Path(path), format="png", dpi=DPI, facecolor="white")
