"""The page layout: one deterministic arrangement of the map frame and its furniture, in mm.

Bands and blocks, each sized from its content (common practice, no source):

* a top band with the title and subtitle, a bottom band with the credits and caution lines;
* the map frame, with room around it for grid labels when the page has a grid;
* a side panel (``page.panel``, right or left, :data:`PANEL_WIDTH` wide) stacking the legend at
  the top and the scale bar and north arrow at the bottom; or a bottom panel under the frame
  (:func:`bottom_panel_height` tall) with the legend on the left and the scale bar and north
  arrow on the right; ``auto`` (the default) takes the side panel unless the bottom one leaves
  a larger map frame (a tall sheet, a wide map);
* or, for a piece placed in a corner, a paper-coloured box inside the frame's corner (pieces in
  the same corner stack inward); labels keep clear of these boxes (:func:`blocked_pixels`).

Nothing overlaps: a legend taller than the room left in the panel is shrunk to fit (type, rows
and samples together, ``Piece.scale``); when that would go below :data:`MIN_SCALE` the page
writer first reflows its class lists into columns (:func:`compose.page.write.fit_legend`).
Coordinates: mm from the sheet's top-left corner, y down; a :data:`Box` is (x, y, w, h).
"""
from __future__ import annotations

from dataclasses import dataclass, field

from compose.errors import StyleError
from compose.page.geometry import MM_PER_INCH, ScaleBar, north_angle, page_canvas, scale_bar

__all__ = ["MIN_SCALE", "FLOOR_SCALE", "Box", "Piece", "PageLayout", "PANEL_WIDTH", "GAP", "TITLE_PT", "SUBTITLE_PT",
           "NOTE_PT", "page_room", "page_layout", "blocked_pixels", "PT_MM"]

Box = tuple[float, float, float, float]
PT_MM = MM_PER_INCH / 72.0          # 1 point in mm
PANEL_WIDTH = 70.0                  # mm
GAP = 6.0                           # mm between the frame and the panel or bands
INSET = 3.0                         # mm from the neat line to a corner box
PAD = 1.5                           # mm inside a corner box
TITLE_PT, SUBTITLE_PT, NOTE_PT = 15.0, 9.5, 6.5
LINE = 1.3                          # line height / font size
SCALEBAR_H, NORTH_W, NORTH_H = 11.0, 10.0, 15.0   # mm
GRID_ROOM = 5.0                     # mm around the frame for grid labels
#: a bottom panel's height: this share of the height left for the frame and panel, within
#: BOTTOM_MIN..BOTTOM_MAX mm (common practice, no source: a legend under the map at 70 mm wide
#: is 40-120 mm tall in the demo's styles)
BOTTOM_SHARE, BOTTOM_MIN, BOTTOM_MAX = 0.3, 50.0, 90.0
#: the smallest shrink of a legend in the panel before it is reflowed into columns (8 pt type
#: becomes 5.6 pt; common practice, no source: map type under ~5-6 pt gets hard to read)
MIN_SCALE = 0.7
#: below this the legend is refused (type under ~3 pt): a larger paper or fewer classes is needed
FLOOR_SCALE = 0.4
#: the band lines' smallest type (pt): a title, subtitle or note line wider than the page is set
#: smaller down to this, and refused below it (common practice, no source: as MIN_SCALE)
MIN_TEXT_PT = {"title": 9.0, "subtitle": 6.5, "credits": 5.0, "caution": 5.0}
#: their size and weight (the caution is set in italic, as wide as upright in the page's font)
BAND_TEXT = {"title": (TITLE_PT, "bold"), "subtitle": (SUBTITLE_PT, "normal"),
             "credits": (NOTE_PT, "normal"), "caution": (NOTE_PT, "normal")}


@dataclass(frozen=True, slots=True)
class Piece:
    """One placed piece of furniture: ``kind`` (title, subtitle, legend, scalebar, north,
    credits, caution), its box and whether it sits inside the frame (on a paper box)."""

    kind: str
    box: Box
    inside: bool = False
    scale: float = 1.0                # the legend drawn at this fraction of its size


@dataclass(frozen=True, slots=True)
class PageLayout:
    """Where everything goes. ``size`` (w, h) mm; ``frame`` the map frame's box; ``canvas`` the
    canvas whose pixels fill the frame exactly; ``pieces`` the furniture; ``scalebar`` and
    ``north`` (degrees clockwise from grid up) their content."""

    size: tuple[float, float]
    frame: Box
    canvas: object
    pieces: tuple[Piece, ...]
    scalebar: ScaleBar | None = None
    north: float | None = None
    title: str = ""
    boxes: dict = field(default_factory=dict)
    #: (w, h) mm a legend in the panel may take at full size (None: no legend in a panel)
    legend_room: tuple[float, float] | None = None

    def piece(self, kind: str) -> Piece | None:
        return next((p for p in self.pieces if p.kind == kind), None)


def _uses_panel(page, legend: bool) -> bool:
    return ((legend and page.legend == "panel") or page.north == "panel"
            or page.scalebar.place == "panel")


def _bands(page, title: str) -> tuple[float, float]:
    """Heights (mm) of the top band (title, subtitle) and the bottom band (credits, caution)."""
    top = (TITLE_PT * LINE * PT_MM if title else 0.0) + \
          (SUBTITLE_PT * LINE * PT_MM if page.subtitle else 0.0)
    bottom = sum(NOTE_PT * LINE * PT_MM for t in (page.credits, page.caution) if t)
    return top, bottom


def _fits(kind: str, text: str, width_mm: float) -> bool:
    """Whether the one line ``text`` of band piece ``kind`` fits ``width_mm`` at full size."""
    from compose.layers.label_text import text_width

    size, weight = BAND_TEXT[kind]
    return text_width(text, size, "DejaVu Sans", weight) * PT_MM <= width_mm


def band_scale(kind: str, text: str, width_mm: float, key: str) -> float:
    """The fraction of its size at which the one line ``text`` of band piece ``kind`` fits
    ``width_mm``: 1.0 when it fits as it is, else smaller down to :data:`MIN_TEXT_PT`; a line
    that would need smaller type is a StyleError naming ``key``."""
    from compose.layers.label_text import text_width

    size, weight = BAND_TEXT[kind]
    wide = text_width(text, size, "DejaVu Sans", weight) * PT_MM
    if wide <= width_mm:
        return 1.0
    scale = width_mm / wide * 0.98           # room for the writers' own text metrics
    if scale * size < MIN_TEXT_PT[kind]:
        # the room it needs counts the same 2 % as the fit (it said "95 mm long ... leaves
        # 95 mm": 94.6 mm of text did not fit 95 mm less that margin)
        need = wide * MIN_TEXT_PT[kind] / size / 0.98
        raise StyleError(f"{key}: needs {need:.1f} mm even at {MIN_TEXT_PT[kind]:g} pt, the page "
                         f"leaves {width_mm:.1f} mm for it; shorten it or use a wider paper")
    return scale


#: the scale bar's lines under the bar: their type (pt), the first one's top and the step
#: between them (mm from the bar's top)
SCALE_LINE_PT, SCALE_LINE_TOP, SCALE_LINE_STEP = 6.0, 3.0, 2.8


def scale_lines(page, bar: ScaleBar) -> list[str]:
    """The lines written under the scale bar: the print scale (stated, or about, at the map
    centre), and where the scale holds when it varies, a line for each of its two clauses."""
    lines = []
    if page.scale is not None:
        lines.append(f"Scale 1:{page.scale:,.0f}".replace(",", "\u2009"))
    elif bar.ratio > 0:
        n = float(f"{bar.ratio:.2g}")
        lines.append(f"Scale about 1:{n:,.0f} at the map centre".replace(",", "\u2009"))
    if bar.note:
        first, _, rest = f"Scale {bar.note}".partition("; ")
        lines += [first] + ([rest] if rest else [])
    return lines


def scalebar_size(page, bar: ScaleBar) -> tuple[float, float]:
    """(w, h) mm of the scale bar piece: the bar with its unit, or its widest line under it if
    wider (a line ran past the piece: out of a corner's paper box, under the north arrow), and
    room for every line."""
    from compose.layers.label_text import text_width

    lines = scale_lines(page, bar)
    widest = max((text_width(t, SCALE_LINE_PT, "DejaVu Sans", "normal") * PT_MM for t in lines),
                 default=0.0)
    return (max(bar.length_mm + 8.0, 1.5 + widest + 1.0),
            SCALEBAR_H + SCALE_LINE_STEP * max(len(lines) - 1, 0))


def bottom_panel_height(room_h: float) -> float:
    """Height (mm) of a bottom panel when ``room_h`` mm are left for the frame and the panel."""
    return min(BOTTOM_MAX, max(BOTTOM_MIN, BOTTOM_SHARE * room_h))


def page_room(style, side: str | None = None) -> tuple[Box, float, float]:
    """(room for the frame (x, y, w, h) mm, top band, bottom band) of ``style``'s page with its
    panel at ``side`` (right, left or bottom; None: :func:`panel_side`'s)."""
    page = style.page
    side = panel_side(style) if side is None else side
    W, H = page.size
    t, r, b, left = page.margin
    title = page.title if page.title is not None else (style.map.title or "")
    top, bottom = _bands(page, title)
    x, y = left, t + (top + GAP * 0.6 if top else 0.0)
    w = W - left - r
    h = H - y - b - (bottom + GAP * 0.6 if bottom else 0.0)
    if _uses_panel(page, True):
        if side == "bottom":
            h -= bottom_panel_height(h) + GAP
        else:
            w -= PANEL_WIDTH + GAP
            if side == "left":
                x += PANEL_WIDTH + GAP
    if page.grid is not None:
        x, y, w, h = x + GRID_ROOM, y + GRID_ROOM, w - 2 * GRID_ROOM, h - 2 * GRID_ROOM
    if w < 20 or h < 20:
        raise StyleError(f"page: the margins and furniture leave {max(w, 0):.0f} x {max(h, 0):.0f} mm"
                         " for the map; use a larger paper or smaller margins")
    return (x, y, w, h), top, bottom


def _grid_of(style, base=None):
    from types import SimpleNamespace

    if base is None:
        from compose.style.grid import plan_canvas
        base = plan_canvas(style).canvas
    return SimpleNamespace(crs=base.crs, extent=base.bounds, pixel=base.pixel, dpi=base.dpi)


def panel_side(style, base=None) -> str:
    """Where ``style``'s panel goes: ``page.panel`` as stated, or for ``auto`` the side panel
    (right) unless a bottom panel leaves a larger map frame (the frame's area in mm², ties to
    the side panel; with a print scale or a frame size, the first of the two that fits)."""
    page = style.page
    if page.panel != "auto":
        return page.panel
    if not _uses_panel(page, True):
        return "right"
    grid = _grid_of(style, base)
    best: tuple[float, str] | None = None
    for side in ("right", "bottom"):
        try:
            room, _, _ = page_room(style, side)
            _, frame = page_canvas(grid, page.frame, room[2:], page.scale)
        except StyleError:
            continue
        area = frame[0] * frame[1]
        if best is None or area > best[0] * (1 + 1e-9):
            best = (area, side)
    return "right" if best is None else best[1]


def frame_offset(style, side: str, room: Box, frame: tuple[float, float]) -> tuple[float, float]:
    """How far (dx, dy) mm the map frame moves from the room's top-left corner so the free room
    is shared out evenly instead of left on the right and at the bottom (common practice, no
    source: a map centred in its sheet): across, by half the width the frame leaves free (the
    side panel moves with it, so frame and panel together sit in the middle of the margins;
    a bottom panel spans the margins whatever the frame's width); down, by half the height it
    leaves free when the panel is beside it or there is none (a bottom panel grows into the
    room under a short frame instead)."""
    _, _, rw, rh = room
    dx = max(0.0, rw - frame[0]) / 2
    below = side == "bottom" and _uses_panel(style.page, True)
    dy = 0.0 if below else max(0.0, rh - frame[1]) / 2
    return dx, dy


def style_canvas(style, base=None):
    """The canvas and frame box of ``style``'s page (used by ``Style.canvas``). ``base``: the
    canvas ``[map]`` alone gives (default :func:`compose.style.grid.plan_canvas`'s): its CRS,
    extent, pixel and dpi are what the page starts from."""
    grid = _grid_of(style, base)
    side = panel_side(style, base)
    room, _, _ = page_room(style, side)
    canvas, frame = page_canvas(grid, style.page.frame, room[2:], style.page.scale)
    dx, dy = frame_offset(style, side, room, frame)
    return canvas, (room[0] + dx, room[1] + dy, frame[0], frame[1])


def page_layout(style, legend_size: tuple[float, float] | None = None) -> PageLayout:
    """Lay out ``style``'s page. ``legend_size``: (w, h) mm of the legend (None: no legend)."""
    page = style.page
    W, H = page.size
    t, r, b, left = page.margin
    title = page.title if page.title is not None else (style.map.title or "")
    side = panel_side(style)
    (rx, ry, rw, rh), top, bottom = page_room(style, side)
    canvas, frame = style_canvas(style)
    fx, fy, fw, fh = frame
    pieces: list[Piece] = []
    # the band lines start where the map (with its panel beside it) starts, when they fit from
    # there at full size; else all of them at the margin as before
    shift = 0.0 if side == "bottom" and _uses_panel(page, True) else fx - rx
    lines = [("title", title, "page.title" if page.title is not None else "map.title"),
             ("subtitle", page.subtitle, "page.subtitle"), ("credits", page.credits,
             "page.credits"), ("caution", page.caution, "page.caution")]
    full = W - left - r
    if shift and not all(_fits(kind, text, full - shift) for kind, text, _ in lines if text):
        shift = 0.0
    x, width = left + shift, full - shift
    y = t
    for kind, text, key in lines:
        if kind == "credits":
            y = H - b - bottom
        if text:
            size = BAND_TEXT[kind][0] * LINE * PT_MM
            pieces.append(Piece(kind, (x, y, width, size),
                                scale=band_scale(kind, text, width, key)))
            y += size
    grid = GRID_ROOM if page.grid is not None else 0.0
    if side == "right":
        px = fx + fw + grid + GAP
    elif side == "left":
        px = fx - grid - GAP - PANEL_WIDTH
    else:
        px = left
    panel_top, panel_bottom = fy - grid, fy + fh + grid
    if side == "bottom":        # under the frame (and its grid labels), down to the notes
        panel_top = fy + fh + grid + GAP
        panel_bottom = H - b - bottom - (GAP * 0.6 if bottom else 0.0)
    bar = scale_bar(canvas, fw, PANEL_WIDTH - NORTH_W - 8.0 if page.scalebar.place == "panel"
                    else 35.0, page.scalebar.units) if page.scalebar.place != "off" else None
    north = north_angle(canvas) if page.north != "off" else None
    sizes = {"legend": legend_size if page.legend != "off" else None,
             "scalebar": scalebar_size(page, bar) if bar else None,
             "north": (NORTH_W, NORTH_H) if north is not None else None}
    places = {"legend": page.legend, "scalebar": page.scalebar.place, "north": page.north}
    if side == "bottom":
        more, legend_room = _bottom_panel(sizes, places, left, W - r, panel_top, panel_bottom)
        pieces += more
    # the panel: legend from the top, scale bar (left) and north arrow (right) at the bottom
    else:
        legend_room = None
    bottom_row = max([sizes[k][1] for k in ("scalebar", "north")
                      if sizes[k] is not None and places[k] == "panel"] + [0.0])
    if side == "bottom":
        pass
    elif sizes["legend"] is not None and places["legend"] == "panel":
        lw, lh = sizes["legend"]
        room = panel_bottom - panel_top - (bottom_row + GAP if bottom_row else 0.0)
        legend_room = (PANEL_WIDTH, room)
        scale = min(1.0, max(room, 1e-6) / lh if lh > room + 0.01 else 1.0,
                    PANEL_WIDTH / lw if lw > PANEL_WIDTH + 0.01 else 1.0)
        pieces.append(Piece("legend", (px, panel_top, lw * scale, lh * scale), scale=scale))
    if sizes["scalebar"] is not None and places["scalebar"] == "panel" and side != "bottom":
        sw, sh = sizes["scalebar"]
        pieces.append(Piece("scalebar", (px, panel_bottom - sh, sw, sh)))
    if sizes["north"] is not None and places["north"] == "panel" and side != "bottom":
        nw, nh = sizes["north"]
        pieces.append(Piece("north", (px + PANEL_WIDTH - nw, panel_bottom - nh, nw, nh)))
    # corners inside the frame: stacked inward from the corner
    stack = {c: 0.0 for c in ("top left", "top right", "bottom left", "bottom right")}
    for kind in ("legend", "scalebar", "north"):
        place, size = places[kind], sizes[kind]
        if size is None or place in ("panel", "off"):
            continue
        w, h = size[0] + 2 * PAD, size[1] + 2 * PAD
        x = fx + INSET if "left" in place else fx + fw - INSET - w
        if place.startswith("top"):
            yy = fy + INSET + stack[place]
        else:
            yy = fy + fh - INSET - stack[place] - h
        stack[place] += h + 2.0
        if w > fw - 2 * INSET or stack[place] > fh - 2 * INSET:
            raise StyleError(f"page.{kind}: does not fit inside the map frame at {place!r}")
        pieces.append(Piece(kind, (x, yy, w, h), inside=True))
    return PageLayout((W, H), frame, canvas, tuple(pieces), bar, north, title,
                      legend_room=legend_room)


def _bottom_panel(sizes: dict, places: dict, x0: float, x1: float, top: float,
                  bottom: float) -> tuple[list[Piece], tuple[float, float] | None]:
    """The pieces of a bottom panel from ``x0`` to ``x1`` mm, ``top`` to ``bottom`` mm: the north
    arrow at the right end, the scale bar left of it (both from the top), the legend from the
    left, shrunk to the room left of them (as in the side panel); and that room (w, h) mm. The
    legend may take all of its width (it was held to the side panel's 70 mm, so a legend laid
    wider was shrunk to that width with the panel half empty)."""
    out = []
    right = x1
    for kind in ("north", "scalebar"):
        if sizes[kind] is not None and places[kind] == "panel":
            w, h = sizes[kind]
            out.append(Piece(kind, (right - w, top, w, h)))
            right -= w + GAP
    if sizes["legend"] is not None and places["legend"] == "panel":
        lw, lh = sizes["legend"]
        room_w, room_h = right - x0, bottom - top
        scale = min(1.0, max(room_h, 1e-6) / lh if lh > room_h + 0.01 else 1.0,
                    max(room_w, 1e-6) / lw if lw > room_w + 0.01 else 1.0)
        out.append(Piece("legend", (x0, top, lw * scale, lh * scale), scale=scale))
        return out, (room_w, room_h)
    return out, None


def blocked_pixels(layout: PageLayout) -> list[tuple[float, float, float, float]]:
    """Canvas pixel boxes (col0, row0, col1, row1) of the pieces inside the map frame."""
    fx, fy, fw, fh = layout.frame
    sx, sy = layout.canvas.width / fw, layout.canvas.height / fh
    out = []
    for p in layout.pieces:
        if p.inside:
            x, y, w, h = p.box
            out.append(((x - fx) * sx, (y - fy) * sy, (x + w - fx) * sx, (y + h - fy) * sy))
    return out
