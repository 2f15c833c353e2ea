"""Layout of the legend (see :mod:`compose.output.legend`): its blocks, their heights in inches,
and where each colour bar lies in the PNG (:class:`BarBox`, :func:`legend_layout`)."""
from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from compose.color import interface as ui
from compose.style.kinds import LAYER_KINDS

__all__ = ["legend_layout", "assemble", "split_rows", "set_columns", "LegendLayout", "BarBox", "RampsBlock",
           "ClassesBlock", "OverlaysBlock", "relief_tones", "seen_under_relief", "TONE_SLOPE",
           "visible_tones", "shaded_key", "STRIPE_DE", "TONE_NAMES",
           "pretty_name", "format_value", "rgb01", "ramp_of", "ramp_marks", "DPI", "WIDTH",
           "END_GAP", "END_W", "END_SIGN", "END", "NOTE_ROW", "SHADED_NOTE"]

#: Legend entries (:data:`compose.style.kinds.LEGEND_ENTRIES`) drawn as a sample of the mark.
SAMPLE_ENTRIES = ("line", "area", "marker", "text")

DPI = 200                 # pixels per inch of the PNG
WIDTH = 3.6               # inches
MARGIN = 0.2              # left and right margin, inches
INK = ui.INK.hex
MUTED = ui.MUTED.hex
FRAME = ui.FRAME.hex
KEY_PATCH = ui.KEY_PATCH.hex   # behind overlay samples: near-neutral, L* 84
PAPER = ui.PAPER.hex
RULE = ui.RULE.hex
FONT = 8.0                # points
TITLE_FONT = 8.6

# vertical sizes, inches
TOP, BOTTOM, GAP = 0.16, 0.14, 0.2
TITLE_H, MARK_H, BAR_H, BAR_GAP, AXIS_H, SWATCH_ROW = 0.24, 0.17, 0.19, 0.05, 0.27, 0.22
CLASS_ROW, FAMILY_ROW, OVERLAY_ROW = 0.205, 0.2, 0.235
NOTE_ROW = 0.17           # the line under a shaded key saying what its stripes are
SHADED_NOTE = "stripes: lit slope, flat ground, shaded slope"
# out-of-domain colours (ramp key outside = { low, high }): at each end of a bar a separate
# square, set off by a gap, with a '<' / '>' sign on its outer side:  < [] [bar....] [] >
END_GAP, END_W, END_SIGN = 0.045, 0.1, 0.08     # inches
END = END_GAP + END_W + END_SIGN                 # room at each end of a bar, inches


def pretty_name(name: str) -> str:
    """``"land-productivity"`` -> ``"Land productivity"`` (dashes, underscores -> spaces)."""
    words = [w for w in re.split(r"[-_\s]+", name) if w]
    text = " ".join(words)
    return text[:1].upper() + text[1:] if text else name


def format_value(v: float) -> str:
    """A tick label: at most 4 significant digits, typographic minus."""
    if v == 0:
        return "0"
    text = f"{v:.4g}" if abs(v) < 1e5 else f"{v:.3g}"
    if "e" not in text and "." in text:
        text = text.rstrip("0").rstrip(".")
    return text.replace("-", "\u2212")


def rgb01(color) -> tuple[float, float, float]:
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
class RampsBlock:
    """One colour-bar block: layers sharing one data scale."""

    layers: list
    title: str
    labels: list[str]
    height: float = 0.0
    fmt: Callable[[float], str] = format_value
    swatches: list = field(default_factory=list)
    seen: Callable | None = None      # colours (n, 3) -> as seen under the relief tones (n, k, 3)
    note: str = SHADED_NOTE           # the caption under a shaded key: what its k stripes are


@dataclass
class ClassesBlock:
    layer: object
    title: str
    rows: list[tuple[str, object]] = field(default_factory=list)   # ("family", name) | ("class", c)
    height: float = 0.0
    fmt: Callable[[float], str] = format_value
    swatches: list = field(default_factory=list)
    seen: Callable | None = None
    columns: list = field(default_factory=list)    # the rows split into columns (empty: one)
    note: str = SHADED_NOTE


@dataclass
class OverlaysBlock:
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


def ramp_of(layer):
    return getattr(layer, "ramp", None)


def _group_key(layer) -> frozenset:
    ramp = ramp_of(layer)
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


def _key(layer):
    """The layer's ``legend`` key table (None for kinds without one)."""
    return getattr(getattr(layer.spec, "options", None), "legend", None)


def _formatter(layer) -> Callable[[float], str]:
    """The layer's number format (``legend.format``) or the default :func:`format_value`."""
    key = _key(layer)
    if key is None or not key.format:
        return format_value
    spec = key.format
    return lambda v: _unsigned_zero(format(float(v), spec)).replace("-", "\u2212")


def _unsigned_zero(text: str) -> str:
    """A formatted number that shows zero without a sign: ``"+0.0"`` and ``"-0.0"`` (a small
    value rounded to zero) read ``"0.0"``; anything with a non-zero digit is kept as it is. Only
    the first sign goes, so an exponent's stays (``"+0.0e+00"`` -> ``"0.0e+00"``). Common
    practice, no source: a signed scale's centre is written 0."""
    if any(c in "123456789" for c in text) or not any(c == "0" for c in text):
        return text
    for i, c in enumerate(text):
        if c in "+-":
            return text[:i] + text[i + 1:]
        if c.isdigit():
            break
    return text


def _key_title(layer, default: str) -> str:
    """``legend.title`` (or ``default``) with ``legend.units`` in brackets after it."""
    key = _key(layer)
    title = key.title if key is not None and key.title else default
    if key is not None and key.units:
        title = f"{title} ({key.units})"
    return title


def _nodata_swatches(layers, seen: set[str] | None = None) -> list[tuple[str, np.ndarray]]:
    """(label, rgb8) of the no-data colours drawn by these layers (transparent ones left out;
    with ``seen``, only for the layers named in it: those with no-data pixels on the map)."""
    out: list[tuple[str, np.ndarray]] = []
    for layer in layers:
        if getattr(layer, "transparent_nodata", False):
            continue
        if seen is not None and layer.spec.name not in seen:
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


#: the slope of the relief tones a shaded legend shows, degrees: a slope this steep facing the
#: light, flat ground, and the same slope facing away (Lambert's law at the relief's altitude)
TONE_SLOPE = 30.0


def relief_tones(layer) -> np.ndarray:
    """(3, 3) sRGB in [0, 1]: the relief layer's colours on a slope lit by the sun, on flat ground
    and on a slope facing away (shade sin(altitude +- TONE_SLOPE), sin(altitude))."""
    import math

    o = layer.spec.options
    s = [math.sin(math.radians(min(90.0, o.altitude + TONE_SLOPE))),
         math.sin(math.radians(o.altitude)),
         max(0.0, math.sin(math.radians(o.altitude - TONE_SLOPE)))]
    rgb8 = np.asarray(layer.palette.rgb8, float)
    levels = len(rgb8) - 1                                    # the last entry is no-data
    return rgb8[np.rint(np.array(s) * (levels - 1)).astype(int)] / 255.0


def seen_under_relief(background, layers, layer) -> Callable | None:
    """A function from colours (n, 3) in [0, 1] of ``layer`` to (n, k, 3): each colour composited
    with the style's relief layers (each at its k tones, :func:`relief_tones`) in layer order, with
    their blend modes and opacities, over the map background -- what the reader sees of that
    colour on lit, flat and shaded ground. None when the style has no relief layer."""
    from compose.composite import composite_over

    reliefs = [la for la in layers if la.spec.kind == "relief"]
    if not reliefs:
        return None
    stack = [la for la in layers if la is layer or la.spec.kind == "relief"]

    def seen(rgb: np.ndarray) -> np.ndarray:
        rgb = np.asarray(rgb, np.float32).reshape(-1, 3)
        n = len(rgb)
        out = np.empty((n, 3, 3), np.float32)
        for k in range(3):
            canvas = np.empty((3, n, 1), np.float32)
            canvas[:] = np.asarray(background, np.float32).reshape(3, 1, 1)
            for la in stack:
                if la is layer:
                    src = rgb.T.reshape(3, n, 1)
                else:
                    src = relief_tones(la)[k].astype(np.float32).reshape(3, 1, 1)
                composite_over(canvas, src, np.float32(la.spec.opacity), la.spec.blend, out=canvas)
            out[:, k] = canvas[:, :, 0].T
        return np.clip(out, 0.0, 1.0)

    return seen


#: CIEDE2000 under which two stripes of a shaded key are taken as one colour (the formula:
#: Sharma, Wu & Dalal 2005, :func:`compose.color.difference.delta_e_2000`; the threshold of 2 --
#: a difference a reader can just tell at a glance -- is common practice, no source)
STRIPE_DE = 2.0

#: what each relief tone of :func:`relief_tones` is called in a shaded key's caption
TONE_NAMES = ("lit slope", "flat ground", "shaded slope")


def visible_tones(seen: Callable, colors: np.ndarray) -> tuple[tuple[int, ...], str]:
    """The relief tones (indices into :func:`relief_tones`) a shaded key shows as stripes, and
    its caption. ``seen``: from :func:`seen_under_relief`; ``colors`` (n, 3) in [0, 1]: the key's
    colours. A slope tone whose colours differ from flat ground's by less than :data:`STRIPE_DE`
    (CIEDE2000, the median over ``colors``) is no stripe of its own: the flat stripe stands for it
    and the caption says so ("lit slope and flat ground") instead of claiming a stripe the reader
    cannot find -- e.g. a near-white relief tint, whose lit slopes are the tint itself."""
    from compose.color.difference import delta_e_2000
    from compose.color.lab import srgb_to_lab

    lab = srgb_to_lab(np.asarray(seen(np.asarray(colors, float).reshape(-1, 3)), float))
    apart = [float(np.median(delta_e_2000(lab[:, k], lab[:, 1]))) >= STRIPE_DE for k in (0, 2)]
    tones = tuple(k for k, keep in zip((0, 1, 2), (apart[0], True, apart[1])) if keep)
    if tones == (0, 1, 2):
        return tones, SHADED_NOTE
    flat = " and ".join(TONE_NAMES[k] for k, keep in zip((0, 1, 2), (not apart[0], True,
                                                                     not apart[1])) if keep)
    if len(tones) == 1:
        return tones, f"as seen on {flat} (alike under this relief)"
    return tones, "stripes: " + ", ".join(flat if k == 1 else TONE_NAMES[k] for k in tones)


def _key_colors(b) -> np.ndarray:
    """(n, 3) in [0, 1]: the colours a colour-bar or class block shows (its tables' colours, or
    its shown classes')."""
    if isinstance(b, RampsBlock):
        return np.concatenate([np.asarray(la.lut.rgb8, float) / 255.0 for la in b.layers])
    return np.array([rgb01(item.rgb) for kind, item in b.rows if kind == "class"], float)


def shaded_key(background, layers, b) -> None:
    """Give block ``b`` its shaded key: ``b.seen`` (None when the style has no relief) maps its
    colours to the visible stripes only (:func:`visible_tones`), ``b.note`` their caption."""
    first = b.layers[0] if isinstance(b, RampsBlock) else b.layer
    seen = seen_under_relief(background, layers, first)
    if seen is None:
        return
    tones, b.note = visible_tones(seen, _key_colors(b))
    if tones == (0, 1, 2):
        b.seen = seen
        return
    pick = list(tones)
    b.seen = lambda rgb: seen(rgb)[:, pick]


def ramp_marks(ramp, fmt: Callable[[float], str] = format_value) -> list[tuple[float, str]]:
    """(value, text) of the marks over a ramp's bar: a threshold ramp's break, a diverging
    ramp's centre; the number in ``fmt``, the axis's own format, so the mark and the tick under
    it read alike ("centre 0.0" over "0.0", not "centre 0")."""
    marks = []
    if ramp.kind == "threshold" and ramp.at is not None:
        marks.append((float(ramp.at), f"threshold {fmt(ramp.at)}"))
    if ramp.kind == "diverging" and ramp.center is not None:
        marks.append((float(ramp.center), f"centre {fmt(ramp.center)}"))
    return marks


def _blocks(layers, seen: set[str] | None = None) -> list:
    """Legend blocks in style order: colour-bar groups, class lists, then the overlays (these
    topmost first, the reverse of the style's drawing order).
    ``seen``: the layers with no-data pixels on the map (None: assume every layer has some)."""
    blocks: list = []
    groups: dict[frozenset, RampsBlock] = {}
    overlays = []
    for layer in layers:
        spec = layer.spec
        ramp = ramp_of(layer)
        if LAYER_KINDS[spec.kind].legend in SAMPLE_ENTRIES:    # a sample of the mark
            overlays.append(layer)
        elif ramp is not None and ramp.kind == "qualitative":
            blocks.append(ClassesBlock(layer, _key_title(layer, pretty_name(spec.name)),
                                   fmt=_formatter(layer)))
        elif ramp is not None and getattr(layer, "lut", None) is not None:
            key = _group_key(layer)
            hit = next((g for k, g in groups.items() if k & key), None)
            if hit is None:
                hit = groups[key] = RampsBlock([], "", [])
                blocks.append(hit)
            hit.layers.append(layer)
    for b in blocks:
        if isinstance(b, RampsBlock):
            b.title, b.labels = _titles([la.spec.name for la in b.layers])
            b.title = _key_title(b.layers[0], b.title)
            b.fmt = _formatter(b.layers[0])
            marks = ramp_marks(ramp_of(b.layers[0]))
            n = len(b.layers)
            swatches = b.swatches = _nodata_swatches(b.layers, seen)
            b.height = (TITLE_H + (MARK_H if marks else 0.04) + n * BAR_H + (n - 1) * BAR_GAP
                        + AXIS_H + (SWATCH_ROW if swatches else 0.0))
        else:
            ramp = ramp_of(b.layer)
            key = _key(b.layer)
            shown = [c for c in ramp.classes
                     if key is None or key.show is None or float(c.value) in key.show]
            families: list[str] = []
            for c in shown:
                if c.family and c.family not in families:
                    families.append(c.family)
            for fam in families:
                b.rows.append(("family", fam))
                b.rows += [("class", c) for c in shown if c.family == fam]
            loose = [c for c in shown if not c.family]
            if loose and families:
                b.rows.append(("family", "other"))
            b.rows += [("class", c) for c in loose]
            swatches = b.swatches = _nodata_swatches([b.layer], seen)
            b.height = (TITLE_H + sum(FAMILY_ROW if k == "family" else CLASS_ROW for k, _ in b.rows)
                        + (SWATCH_ROW + 0.04 if swatches else 0.0) + 0.04)
    if overlays:   # topmost first: the layer drawn last over the map heads the list (common
        # practice, no source; the style has no legend order of its own: layers are drawn in
        # file order, first lowest)
        blocks.append(OverlaysBlock(overlays[::-1], height=len(overlays) * OVERLAY_ROW + 0.04))
    return blocks


def _bar_geometry(block: RampsBlock, width: float = WIDTH) -> tuple[float, float, float]:
    """(left of the bar labels column, x0, x1) of a colour-bar block, inches."""
    chars = max((len(t) for t in block.labels), default=0)
    label_w = 0.0 if chars == 0 else min(1.3, 0.14 + 0.068 * chars)
    x0 = MARGIN + label_w + END
    x1 = width - MARGIN - END
    return MARGIN, x0, x1


def _scale(lut, x0: float, x1: float) -> tuple[np.ndarray, np.ndarray]:
    """(values, xs) of the data -> position map: linear for continuous ramps, equal-width
    classes for stepped ones (breaks at evenly spaced positions)."""
    edges = np.asarray(lut.edges, dtype=float)
    if lut.stepped:
        return edges, np.linspace(x0, x1, len(edges))
    return np.array([edges[0], edges[-1]]), np.array([x0, x1])


def _shared_scale(block: RampsBlock, x0, x1) -> tuple[np.ndarray, np.ndarray]:
    """One scale for every bar of the block: the first layer's, unless their stepped edges differ
    (then a linear data scale over the union of the domains)."""
    luts = [la.lut for la in block.layers]
    first = _scale(luts[0], x0, x1)
    if all(np.array_equal(_scale(lut, x0, x1)[0], first[0]) for lut in luts[1:]):
        return first
    lo = min(float(lut.edges[0]) for lut in luts)
    hi = max(float(lut.edges[-1]) for lut in luts)
    return np.array([lo, hi]), np.array([x0, x1])


def _row_height(kind: str) -> float:
    return FAMILY_ROW if kind == "family" else CLASS_ROW


def split_rows(rows: list, n: int) -> list[list]:
    """Class rows shared out in order over ``n`` columns of about equal height (a family
    heading never ends a column; a family broken between columns has its heading again at the
    top of the next, so no class stands under another family's heading or none)."""
    total = sum(_row_height(k) for k, _ in rows)
    cols: list[list] = [[]]
    used = 0.0
    family = None
    for row in rows:
        h = _row_height(row[0])
        if len(cols) < n and cols[-1] and used + h / 2 > total / n * len(cols):
            if cols[-1][-1][0] == "family":            # keep a heading with its first class
                cols.append([cols[-1].pop()])
            else:
                cols.append([family] if family is not None and row[0] == "class" else [])
        if row[0] == "family":
            family = row
        cols[-1].append(row)
        used += h
    return cols


def _class_width(b: ClassesBlock) -> float:
    """Inches one column of ``b``'s rows needs: swatch, gap and the longest label at FONT."""
    from compose.layers.draw import measure_text

    widest = max((measure_text(item.label or b.fmt(item.value), FONT).width / 72.0
                  for k, item in b.rows if k == "class"), default=0.0)
    return 0.38 + widest + 0.15


def set_columns(b: ClassesBlock, n: int, width: float) -> None:
    """Lay ``b``'s class rows in up to ``n`` columns, as many as fit in ``width`` inches. The
    columns are drawn ``room / n`` apart and a column's family headings stand ``indent`` left
    of its swatches, so each column takes its rows' width and the indent: the gap after its
    longest label stays whole (the next column's headings took 0.12 of its 0.15 inch)."""
    indent = 0.12 if any(k == "family" for k, _ in b.rows) else 0.0
    room = width - 2 * MARGIN - indent
    n = max(1, min(n, int(room // max(_class_width(b) + indent, 1e-6)), len(b.rows) // 2 or 1))
    b.columns = split_rows(b.rows, n)
    tallest = max(sum(_row_height(k) for k, _ in col) for col in b.columns)
    b.height = (TITLE_H + tallest + (SWATCH_ROW + 0.04 if b.swatches else 0.0) + 0.04
                + (NOTE_ROW if b.seen is not None else 0.0))


def legend_layout(style, ramps, layers, width: float = WIDTH,
                  nodata_seen: set[str] | None = None, columns: int = 1) -> LegendLayout:
    """The legend's size and bar boxes (see :class:`LegendLayout`) without drawing it;
    ``width`` in inches (a page's panel gives its own); ``nodata_seen``: names of the layers with
    no-data pixels on the map (their no-data swatches are shown; None shows every one);
    ``columns``: class lists are laid in up to this many columns (as many as their labels allow
    at ``width``)."""
    blocks = _blocks(layers, nodata_seen)
    for b in blocks:                       # shaded keys: the colours as seen under the relief
        first = b.layers[0] if isinstance(b, RampsBlock) else getattr(b, "layer", None)
        key = _key(first) if first is not None else None
        if key is not None and key.shaded:
            shaded_key(style.map.background, layers, b)
            if b.seen is not None:
                b.height += NOTE_ROW
        if isinstance(b, ClassesBlock) and columns > 1:
            set_columns(b, columns, width)
    return assemble(blocks, width)


def assemble(blocks: list, width: float = WIDTH) -> LegendLayout:
    """The :class:`LegendLayout` of ``blocks`` stacked from the top at ``width`` inches."""
    height = TOP + sum(b.height for b in blocks) + GAP * max(0, len(blocks) - 1) + BOTTOM
    if not blocks:
        height = TOP + 0.3 + BOTTOM
    bars = []
    y = TOP
    for b in blocks:
        if isinstance(b, RampsBlock):
            _, x0, x1 = _bar_geometry(b, width)
            values, xs = _shared_scale(b, x0, x1)
            marks = ramp_marks(ramp_of(b.layers[0]))
            top = y + TITLE_H + (MARK_H if marks else 0.04)
            for i, layer in enumerate(b.layers):
                by = top + i * (BAR_H + BAR_GAP)
                bars.append(BarBox(layer.spec.name, x0 * DPI, x1 * DPI, by * DPI, (by + BAR_H) * DPI,
                                   tuple(float(v) for v in values),
                                   tuple(float(x) * DPI for x in xs)))
        y += b.height + GAP
    return LegendLayout(width, height, DPI, tuple(bars), tuple(blocks))
