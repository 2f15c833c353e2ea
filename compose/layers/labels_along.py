"""Labels along lines: a name set glyph by glyph along its line (curved text), upright, on a
smooth stretch, repeated every ``spacing`` pixels, and kept clear of other labels and of the page
furniture.

Rule (common practice, no source):

- Each glyph sits at its advance-width position along the line (kerning kept), its baseline
  parallel to the line under it and lifted :data:`LIFT` text heights (plus the descent) off it,
  so the name runs just beside its line without touching it. The line is first smoothed over
  :data:`SMOOTH` text heights (:func:`smooth_part`) so pixel-scale wiggles of the data do not
  shake the glyphs; where the real line wanders toward the text the whole name is lifted further,
  and a stretch whose smoothed line leaves the real one by more than :data:`HUG` font sizes is
  refused (the name would float off its line).
- A stretch is smooth when the turn between consecutive glyphs stays within :data:`MAX_TURN`
  degrees (25 degrees, the usual limit for curved type) and the whole name turns at most
  :data:`MAX_BEND` degrees.
- Upright: the name reads in the direction of the stretch's chord when that points rightward
  (screen angle in (-90, 90]), else it is laid the other way along the line; every glyph must
  then stay within +-90 degrees of horizontal.
- Placement order: every name gets its first label before any name gets a repeat (names in
  order of priority, then length of line); the first label goes nearest the middle of the longest
  part; repeats then go every ``spacing`` from it along its part (from the middle of the other
  parts), at least 0.7 spacing from the name's other labels. A candidate slides along the line
  in steps of half a text height (up to :data:`SLIDE` spacings) before it gives up.
- Collisions are tested glyph by glyph: each glyph's turned box (grown by half the halo) is
  boxed axis-aligned; no box may leave the canvas or meet a placed one.
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

from compose.layers.agg import Path
from compose.layers.paths import flatten, to_pixels

__all__ = ["AlongGlyph", "AlongLabel", "GlyphRun", "glyph_run", "place_along", "draw_along",
           "glyph_outline", "smooth_part", "text_frame", "LIFT", "MAX_TURN", "MAX_BEND", "HUG"]

#: the gap between the line and the text's descent, in text heights (the name sits beside its line)
LIFT = 0.2
#: the largest turn between consecutive glyphs, degrees (common practice, no source: 25-30)
MAX_TURN = 25.0
#: the largest turn over the whole name, degrees (common practice, no source)
MAX_BEND = 100.0
#: the length the line is smoothed over before the glyphs are set, in text heights
SMOOTH = 2.0
#: how far the smoothed line may leave the real one under a glyph, in font sizes
HUG = 0.5
#: how far a candidate may slide from its target, in spacings
SLIDE = 0.45


@dataclass(frozen=True, slots=True)
class AlongGlyph:
    """One placed glyph, canvas pixels (rows down): ``col, row`` its baseline-left anchor (the
    pen position), ``angle`` its screen angle in degrees counter-clockwise, ``foot`` the point of
    the (smoothed) line under its middle, ``box`` (col0, row0, col1, row1) around the turned
    glyph grown by half the halo."""

    char: str
    col: float
    row: float
    angle: float
    foot: tuple[float, float]
    box: tuple[float, float, float, float]


@dataclass(frozen=True, slots=True)
class AlongLabel:
    """A name placed along a line: its glyphs, the mean screen angle (degrees, within +-90) and
    the box around all its glyph boxes."""

    text: str
    glyphs: tuple[AlongGlyph, ...]
    angle: float
    box: tuple[float, float, float, float]
    size_px: float
    font: str
    weight: str

    @property
    def glyph_boxes(self) -> list[tuple[float, float, float, float]]:
        return [g.box for g in self.glyphs]


@dataclass(frozen=True, slots=True)
class GlyphRun:
    """A text laid out on a straight baseline: per character its pen position ``x`` and
    ``advance`` (pixels, kerning included), the run's ascent and descent (pixels >= 0) and its font
    size (pixels)."""

    chars: tuple[str, ...]
    x: np.ndarray
    advance: np.ndarray
    ascent: float
    descent: float
    size: float

    @property
    def width(self) -> float:
        return float(self.x[-1] + self.advance[-1]) if len(self.chars) else 0.0

    @property
    def height(self) -> float:
        return self.ascent + self.descent


@functools.lru_cache(maxsize=1024)
def glyph_run(text: str, size_px: float, font: str = "DejaVu Sans",
              weight: str = "normal") -> GlyphRun:
    """Pen positions and advances of ``text``'s characters at ``size_px`` (unhinted advances and
    the font's kerning, as the text renderer lays them out; :mod:`compose.layers.label_text`)."""
    from compose.layers.label_text import face, font_object, ft2font, measure_text

    ft = font_object(face(font, weight))
    kerning, flags = ft2font().Kerning.DEFAULT, ft2font().LoadFlags.NO_HINTING
    ft.set_size(float(size_px), 72.0)
    xs, adv = [], []
    pen, prev = 0.0, None
    for ch in text:
        idx = ft.get_char_index(ord(ch))
        if prev is not None:
            pen += ft.get_kerning(prev, idx, kerning) / 64.0
        g = ft.load_char(ord(ch), flags=flags)
        xs.append(pen)
        adv.append(g.linearHoriAdvance / 65536.0)
        pen += adv[-1]
        prev = idx
    whole = measure_text(text, float(size_px), font, weight)
    return GlyphRun(tuple(text), np.array(xs, float), np.array(adv, float), whole.ascent,
                    whole.descent, float(size_px))


@functools.lru_cache(maxsize=4096)
def glyph_outline(char: str, size_px: float, font: str = "DejaVu Sans",
                  weight: str = "normal") -> tuple[np.ndarray, np.ndarray]:
    """(vertices (N, 2) y up, codes (N,)) of one glyph's outline, origin at its pen position."""
    from compose.layers.label_text import text_outline

    v, codes = text_outline(char, float(size_px), font, weight)
    codes = codes if codes is not None else np.full(len(v), Path.LINETO, Path.code_type)
    v.setflags(write=False)
    return v, np.asarray(codes)


def text_frame(angle: float) -> tuple[np.ndarray, np.ndarray]:
    """(u, v): unit vectors in canvas pixels (rows down) along the text and toward its top, for
    a screen angle in degrees counter-clockwise."""
    t = math.radians(angle)
    return np.array([math.cos(t), -math.sin(t)]), np.array([-math.sin(t), -math.cos(t)])


def _parts(geoms, transform) -> list[np.ndarray]:
    import shapely

    g = flatten(geoms)
    if not len(g):
        return []
    xy, idx = shapely.get_coordinates(g, return_index=True)
    px = to_pixels(xy, transform)
    cuts = np.flatnonzero(np.diff(idx)) + 1
    return [p for p in np.split(px, cuts) if len(p) > 1]


def _arc(pts: np.ndarray) -> np.ndarray:
    return np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(pts, axis=0).T))])


def smooth_part(pts: np.ndarray, window_px: float) -> np.ndarray:
    """The line ``pts`` (n, 2) resampled every quarter window and smoothed by a moving average
    over ``window_px`` of arc length (the ends kept in place)."""
    cum = _arc(pts)
    total = float(cum[-1])
    if total <= 0:
        return pts[:1]
    step = max(window_px / 4.0, 0.5)
    s = np.linspace(0.0, total, max(int(math.ceil(total / step)) + 1, 2))
    rs = np.column_stack([np.interp(s, cum, pts[:, 0]), np.interp(s, cum, pts[:, 1])])
    k = int(round(window_px / step)) | 1
    if k < 3 or len(rs) < k:
        return rs
    pad = k // 2
    ext = np.concatenate([np.repeat(rs[:1], pad, 0), rs, np.repeat(rs[-1:], pad, 0)])
    c = np.cumsum(np.vstack([np.zeros((1, 2)), ext]), axis=0)
    sm = (c[k:] - c[:-k]) / k
    sm[0], sm[-1] = rs[0], rs[-1]
    return sm


def _at(pts: np.ndarray, cum: np.ndarray, s: np.ndarray) -> np.ndarray:
    return np.column_stack([np.interp(s, cum, pts[:, 0]), np.interp(s, cum, pts[:, 1])])


class _Part:
    """One line part prepared for placing: the smoothed line, its arc length, and the distance
    test against the real line."""

    def __init__(self, pts: np.ndarray, window: float):
        import shapely

        self.raw = shapely.LineString(pts)
        self.raw_pts = pts
        self.pts = smooth_part(pts, window)
        self.cum = _arc(self.pts)
        self.total = float(self.cum[-1])
        self.placed: list[float] = []       # arc positions of this part's labels


def _frames(P: np.ndarray, t: np.ndarray, at: np.ndarray, half: np.ndarray):
    """Points of the polyline ``P`` (arc parameter ``t``) at ``at``, and the screen angle
    (degrees) of the chord from ``at - half`` to ``at + half``."""
    pt = _at(P, t, at)
    d = _at(P, t, at + half) - _at(P, t, at - half)
    return pt, np.degrees(np.arctan2(-d[:, 1], d[:, 0]))


def _uv(ang: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    r = np.radians(ang)
    return (np.column_stack([np.cos(r), -np.sin(r)]), np.column_stack([-np.sin(r), -np.cos(r)]))


def _fit(part: _Part, s: float, run: GlyphRun, grow: float, width: int, height: int, grid,
         text: str) -> tuple[AlongLabel, list] | None:
    """The label of ``run`` centred at arc position ``s`` of ``part``, or None when the stretch
    is not smooth, not upright, leaves the canvas or meets a placed box.

    The glyphs are set on the baseline curve: the smoothed line offset toward the text's top by
    the lift, so they keep their advance widths on either side of a bend."""
    import shapely

    W, h = run.width, run.height
    a, b = s - W / 2, s + W / 2
    if a < 0 or b > part.total:
        return None
    ends = _at(part.pts, part.cum, np.array([a, b]))
    chord = ends[1] - ends[0]
    if float(np.hypot(*chord)) < W * 0.7:            # the stretch doubles back on itself
        return None
    heading = math.degrees(math.atan2(-chord[1], chord[0]))
    forward = -90.0 + 1e-6 < heading <= 90.0 + 1e-6   # else lay the name the other way
    # the stretch in reading order, with a margin for the tangents at its ends
    lo, hi = max(0.0, a - h), min(part.total, b + h)
    ss = np.linspace(lo, hi, int(math.ceil((hi - lo) / max(h / 8, 0.5))) + 2)
    if not forward:
        ss = ss[::-1]
    P = _at(part.pts, part.cum, ss)
    t = np.abs(ss - ss[0])
    tc = abs(s - ss[0])
    mid_x = run.x + run.advance / 2
    half = np.maximum(run.advance / 2, h / 4)
    foot, ang = _frames(P, t, tc - W / 2 + mid_x, half)
    # the real line's furthest reach toward the text side under each glyph lifts the whole name
    u, v = _uv(ang)
    box_lo, box_hi = foot.min(axis=0) - W, foot.max(axis=0) + W
    raw = part.raw_pts[np.all((part.raw_pts >= box_lo) & (part.raw_pts <= box_hi), axis=1)]
    reach = 0.0
    if len(raw):
        rel = raw[None, :, :] - foot[:, None, :]                       # (glyph, point, 2)
        under = np.abs(np.einsum("gpk,gk->gp", rel, u)) <= (run.advance / 2)[:, None]
        if np.any(under):
            up = np.einsum("gpk,gk->gp", rel, v)
            reach = max(0.0, float(np.max(np.where(under, up, -np.inf))))
    if reach > HUG * run.size:
        return None                                   # the line wanders too far under the name
    lift = LIFT * h + run.descent + reach
    # the baseline curve: the stretch offset by the lift toward the text's top
    d = np.gradient(P, axis=0)
    n = np.hypot(d[:, 0], d[:, 1])
    if np.any(n <= 0):
        return None
    Q = P + np.column_stack([d[:, 1], -d[:, 0]]) / n[:, None] * lift
    tq = _arc(Q)
    cq = float(np.interp(tc, t, tq))
    gm = cq - W / 2 + mid_x
    if gm[0] - half[0] < 0 or gm[-1] + half[-1] > tq[-1]:
        return None
    base_mid, ang = _frames(Q, tq, gm, half)
    if np.any(np.abs(ang) > 90.0 + 1e-6):
        return None                                   # a glyph would lean upside down
    turn = np.diff(ang)
    if len(turn) and (float(np.max(np.abs(turn))) > MAX_TURN
                      or abs(float(ang[-1] - ang[0])) > MAX_BEND):
        return None                                   # not a smooth stretch
    foot = _at(P, t, np.interp(gm, tq, t))           # the line's point under each glyph
    if float(np.max(shapely.distance(shapely.points(foot), part.raw))) > HUG * run.size:
        return None                                   # smoothing moved the name off its line
    u, v = _uv(ang)
    anchor = base_mid - u * (run.advance / 2)[:, None]
    glyphs, boxes = [], []
    for i, ch in enumerate(run.chars):
        cs = np.array([anchor[i] + u[i] * x + v[i] * y for x in (0.0, float(run.advance[i]))
                       for y in (-run.descent, run.ascent)])
        box = (float(cs[:, 0].min() - grow), float(cs[:, 1].min() - grow),
               float(cs[:, 0].max() + grow), float(cs[:, 1].max() + grow))
        if box[0] < 0 or box[1] < 0 or box[2] > width or box[3] > height:
            return None
        if not ch.isspace():
            if grid.hits(box):
                return None
            boxes.append(box)
        glyphs.append(AlongGlyph(ch, float(anchor[i, 0]), float(anchor[i, 1]), float(ang[i]),
                                 (float(foot[i, 0]), float(foot[i, 1])), box))
    if not boxes:
        return None
    arr = np.array(boxes)
    union = (float(arr[:, 0].min()), float(arr[:, 1].min()), float(arr[:, 2].max()),
             float(arr[:, 3].max()))
    return AlongLabel(text, tuple(glyphs), float(np.mean(ang)), union, 0.0, "", ""), boxes


def _slides(target: float, reach: float, total: float, W: float, h: float) -> np.ndarray:
    """Arc positions to try around ``target``: the target, then alternately further each side
    in half-text-height steps, up to ``reach`` pixels away, within the part."""
    n = int(reach / max(h / 2, 1.0))
    ds = np.arange(1, n + 1) * max(h / 2, 1.0)
    cand = np.concatenate([[target], np.column_stack([target + ds, target - ds]).ravel()])
    return cand[(cand >= W / 2) & (cand <= total - W / 2)]


def place_along(items, transform, width: int, height: int, *, size_px: float,
                font: str = "DejaVu Sans", weight: str = "normal", halo_px: float = 0.0,
                spacing_px: float = 300.0, grid=None) -> tuple[list[AlongLabel], list[str]]:
    """Place ``items`` = [(line geometry in canvas CRS, text, priority)] along their lines.

    ``grid``: a collision grid shared with other labels (:class:`compose.layers.label_placement.BoxGrid`);
    the placed glyph boxes are added to it. Returns (placed labels, texts of the items that found
    no place).
    """
    from compose.layers.label_placement import BoxGrid

    grid = grid if grid is not None else BoxGrid()
    if not float(size_px) >= 1.0:                  # under a pixel: nothing to set
        return [], [str(t) for _g, t, _p in items]
    grow = max(float(halo_px), 0.0) / 2.0
    prepared = []
    for geom, text, prio in items:
        text = str(text)
        if not text.strip():
            continue
        run = glyph_run(text, float(size_px), font, weight)
        parts = [_Part(p, SMOOTH * run.height) for p in _parts([geom], transform)]
        parts = sorted((p for p in parts if p.total >= run.width * 1.05), key=lambda p: -p.total)
        prepared.append((float(prio), sum(p.total for p in parts), text, run, parts))
    prepared.sort(key=lambda t: (-t[0], -t[1]))
    step = float(spacing_px)
    labels: dict[str, list[AlongLabel]] = {}

    def put(part: _Part, s: float, run: GlyphRun, text: str) -> bool:
        got = _fit(part, float(s), run, grow, width, height, grid, text)
        if got is None:
            return False
        lab, boxes = got
        lab = AlongLabel(lab.text, lab.glyphs, lab.angle, lab.box, float(size_px), font, weight)
        for box in boxes:
            grid.add(box)
        part.placed.append(float(s))
        labels.setdefault(text, []).append(lab)
        return True

    for _prio, _len, text, run, parts in prepared:       # first label of every name
        done = False
        for part in parts:
            mid = part.total / 2
            for s in _slides(mid, mid, part.total, run.width, run.height):
                if put(part, s, run, text):
                    done = True
                    break
            if done:
                break
    for _prio, _len, text, run, parts in prepared:       # then the repeats
        if text not in labels:
            continue
        stp = max(step, run.width * 1.5)
        for part in parts:
            if part.total < stp:
                continue
            start = part.placed[0] if part.placed else part.total / 2
            k = np.arange(1, int(part.total / stp) + 2)
            targets = np.column_stack([start + k * stp, start - k * stp]).ravel()
            if not part.placed:
                targets = np.concatenate([[start], targets])
            for target in targets[(targets >= 0) & (targets <= part.total)]:
                for s in _slides(float(target), SLIDE * stp, part.total, run.width, run.height):
                    if any(abs(s - q) < 0.7 * stp for q in part.placed):
                        continue
                    if put(part, s, run, text):
                        break
    placed = [lab for _p, _l, text, _r, _parts_ in prepared for lab in labels.get(text, [])]
    unplaced = [text for _p, _l, text, _r, _parts_ in prepared if text not in labels]
    unplaced += [str(t) for _g, t, _p in items if not str(t).strip()]
    return placed, unplaced


def along_path(labels: list[AlongLabel], c0: float = 0.0, r0: float = 0.0,
               height: float | None = None) -> Path | None:
    """All glyph outlines of ``labels`` as one path in pixels relative to (c0, r0): rows down,
    or display y up when ``height`` is given (y = height - row)."""
    verts, codes = [], []
    for lab in labels:
        for g in lab.glyphs:
            v, c = glyph_outline(g.char, lab.size_px, lab.font, lab.weight)
            if not len(v):
                continue
            u, w = text_frame(g.angle)
            px = np.array([g.col - c0, g.row - r0]) + v[:, 0:1] * u + v[:, 1:2] * w
            if height is not None:
                px[:, 1] = height - px[:, 1]
            verts.append(px)
            codes.append(c)
    if not verts:
        return None
    return Path(np.concatenate(verts), np.concatenate(codes), readonly=True)


def draw_along(labels: list[AlongLabel], c0: float, r0: float, width: int, height: int,
               halo_px: float = 0.0) -> tuple[np.ndarray | None, np.ndarray | None]:
    """Coverage (text, halo) of the labels meeting the window whose top-left canvas pixel is
    (c0, r0), or (None, None) when none does."""
    from compose.layers.draw import fill_text_path

    near = [lab for lab in labels
            if not (lab.box[2] <= c0 or lab.box[0] >= c0 + width or lab.box[3] <= r0
                    or lab.box[1] >= r0 + height)]
    path = along_path(near, c0, r0, height) if near else None
    if path is None:
        return None, None
    return fill_text_path(path, width, height, halo_px)
