"""Page furniture counts as overlay: its text and marks are judged by the checker's contrast
rules against what lies beneath them.

Text (title, notes, legend text, scale figures, grid labels) is judged like labels (WCAG 2.1
SC 1.4.3, ``budget.overlay.label_contrast``); marks (neat line, scale bar, north arrow, grid
ticks and lines, the edge of a box inside the frame) like lines (SC 1.4.11,
``budget.overlay.contrast``), on ``budget.overlay.share`` of their pixels. Furniture on the
paper, in the panel or on a corner box has the paper beneath it; grid lines drawn across the map
and the edges of corner boxes have the map beneath them, sampled from the finished map. A corner
box's edge is an ink line along a paper box, so the box stands apart from the map where the line
or the paper beside it reaches the contrast (whichever is the greater at each pixel): a box on a
dark sea is told from it by its paper, on a light ground by its line. The
results join the report under the check's own rule ids (``label-contrast``,
``overlay-contrast``), with the layer named ``page <piece>``.
"""
from __future__ import annotations

import dataclasses

import numpy as np

from compose.check import Report, RuleResult
from compose.check.catalog import CATALOG, limit_of
from compose.check.stats import contrast_bins, contrast_share
from compose.color.parse import parse_color
from compose.color.wcag import relative_luminance

__all__ = ["furniture_parts", "with_furniture", "GRID_ALPHA"]

GRID_ALPHA = 0.55        # opacity of grid lines across the map (compose.page.draw)


def _hex(rgb) -> str:
    rows = np.atleast_2d(np.asarray(rgb, float))
    return " or ".join("#" + "".join(f"{int(round(float(v) * 255)):02x}" for v in row)
                       for row in rows)


def _edge_pixels(image: np.ndarray, box) -> np.ndarray:
    """Map pixels (n, 3) along the edges of a canvas pixel box (col0, row0, col1, row1)."""
    h, w = image.shape[:2]
    c0, r0, c1, r1 = (int(round(v)) for v in box)
    c0, c1 = max(0, min(c0, w - 1)), max(0, min(c1, w - 1))
    r0, r1 = max(0, min(r0, h - 1)), max(0, min(r1, h - 1))
    return np.concatenate([image[r0, c0:c1 + 1], image[r1, c0:c1 + 1],
                           image[r0:r1 + 1, c0], image[r0:r1 + 1, c1]]).reshape(-1, 3)


def furniture_parts(style, layout, image: np.ndarray | None = None):
    """(piece, part, colour (3,) sRGB 0-1, alpha, beneath (n, 3) sRGB 0-1, text?) of the page's
    furniture. ``image``: the finished map (H, W, 3) uint8, for what lies under marks on it."""
    from compose.output.legend_layout import INK, MUTED
    from compose.page.layout import blocked_pixels

    page = style.page
    ink = np.asarray(page.ink, float)
    paper = np.asarray(page.color, float)[None, :]
    kinds = {p.kind for p in layout.pieces}
    parts = []
    for kind in ("title", "subtitle", "credits", "caution"):
        if kind in kinds:
            parts.append((kind, "text", ink, 1.0, paper, True))
    if page.neatline:
        parts.append(("neat line", "stroke", ink, 1.0, paper, False))
    if "scalebar" in kinds:
        parts.append(("scale bar", "stroke", ink, 1.0, paper, False))
        parts.append(("scale bar", "text", ink, 1.0, paper, True))
    if "north" in kinds:
        parts.append(("north arrow", "stroke", ink, 1.0, paper, False))
    if "legend" in kinds:
        for c in (INK, MUTED):
            parts.append(("legend", "text", np.asarray(parse_color(c), float), 1.0, paper, True))
    if page.grid is not None:
        parts.append(("grid", "text", ink, 1.0, paper, True))
        parts.append(("grid", "stroke", ink, 1.0, paper, False))
    if image is not None:
        below = image.reshape(-1, 3)[::97].astype(float) / 255.0
        if page.grid is not None and page.grid.lines and len(below):
            parts.append(("grid lines", "stroke", ink, GRID_ALPHA, below, False))
        for box in blocked_pixels(layout):
            parts.append(("corner box", "stroke", np.stack([ink, paper[0]]), 1.0,
                          _edge_pixels(image, box).astype(float) / 255.0, False))
    return parts


def _share(color, alpha, beneath, limit) -> float:
    """The share of ``beneath`` pixels against which ``color`` (or the best of its rows, one
    colour each) at ``alpha`` reaches WCAG contrast ``limit``."""
    y2 = relative_luminance(beneath)
    ratio = np.zeros(np.shape(y2))
    for row in np.atleast_2d(np.asarray(color, float)):
        seen = alpha * row[None, :] + (1 - alpha) * beneath      # what the eye gets on top
        y1 = relative_luminance(seen)
        ratio = np.maximum(ratio, (np.maximum(y1, y2) + 0.05) / (np.minimum(y1, y2) + 0.05))
    hist = np.bincount(contrast_bins(ratio), minlength=1).astype(float)
    return contrast_share(hist, limit)


def with_furniture(report: Report, style, layout, image: np.ndarray | None = None) -> Report:
    """``report`` with one contrast result per piece of furniture and part added."""
    ob = style.budgets.overlay
    out = []
    for piece, part, color, alpha, beneath, text in furniture_parts(style, layout, image):
        limit = float(ob.label_contrast if text else ob.contrast)
        rule = "label-contrast" if text else "overlay-contrast"
        source = "WCAG 2.1 SC 1.4.3" if text else "WCAG 2.1 SC 1.4.11"
        share = _share(color, alpha, beneath, limit)
        passed = bool(share >= ob.share)
        where = "the paper" if beneath.shape[0] == 1 else "the map beneath"
        msg = (f"page {part} {_hex(color)}: {share:.1%} of its pixels reach WCAG contrast "
               f"{limit:g}:1 ({source}) against {where}; need {ob.share:.0%}")
        fix = "" if passed else ("darken page.ink (or lighten page.color) until it reaches "
                                 f"{limit:g}:1")
        info = CATALOG[rule]
        _, origin, key = limit_of(rule, style.budgets)
        out.append(RuleResult(rule, f"page {piece}", share, float(ob.share), passed, msg, fix,
                              comparison=info.comparison, unit=info.unit, budget=key,
                              origin=origin))
    return dataclasses.replace(report, rules=tuple(report.rules) + tuple(out))
