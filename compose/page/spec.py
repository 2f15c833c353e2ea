"""``[page]``: paper, margins, print scale or frame size, and the furniture placed on the page.

Lengths are millimetres, font sizes points (1/72 inch). Paper sizes: ISO 216 A and B series
(A0 841 x 1189 mm ... each next size halves the longer side, rounded down to whole mm) and
ANSI letter (215.9 x 279.4 mm) and legal (215.9 x 355.6 mm). The names of the keys and choices
are our own (docs/style.md, "Page").
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from compose.color import interface as ui
from compose.errors import StyleError
from compose.style.validate import RGB, Scope, as_table, boolean, build_from_table, choice, number, option, string
from compose.style.validate import color as _color

__all__ = ["PAPER_SIZES", "PLACES", "PANEL_SIDES", "UNITS", "ScaleBarSpec", "GridSpec",
           "PageSpec", "paper_size", "parse_page"]


def _iso_series(long0: float, short0: float, prefix: str) -> dict[str, tuple[float, float]]:
    """ISO 216: size n+1 is size n with its longer side halved (rounded down to whole mm)."""
    out = {}
    w, h = short0, long0
    for n in range(0, 9):
        out[f"{prefix}{n}"] = (float(w), float(h))
        w, h = h // 2, w
    return out


#: Named paper sizes, portrait (width, height) in mm: ISO 216 A0 841 x 1189, B0 1000 x 1414;
#: ANSI letter and legal (8.5 x 11 and 8.5 x 14 inches).
PAPER_SIZES: dict[str, tuple[float, float]] = {
    **_iso_series(1189, 841, "A"), **_iso_series(1414, 1000, "B"),
    "letter": (215.9, 279.4), "legal": (215.9, 355.6),
}
#: Where a piece of furniture goes: in the side panel, in a corner inside the map frame (on a
#: paper-coloured box that labels keep clear of), or nowhere.
PLACES = ("panel", "top left", "top right", "bottom left", "bottom right", "off")
#: Which side of the map frame the furniture panel takes; "auto": the right side unless the
#: bottom leaves a larger map frame (compose.page.layout.panel_side).
PANEL_SIDES = ("auto", "right", "left", "bottom")
#: Scale bar units.
UNITS = ("metric", "imperial")
from compose.caution import CAUTION as _CAUTION  # noqa: E402  one wording everywhere


def paper_size(value: Any, at: Scope) -> tuple[float, float]:
    """A paper name (case-insensitive) or ``[width, height]`` in mm -> portrait (w, h) mm."""
    if isinstance(value, str):
        key = {k.lower(): k for k in PAPER_SIZES}.get(value.strip().lower())
        if key is None:
            raise StyleError(f"{at.path}: unknown paper {value!r}; one of: "
                             f"{', '.join(PAPER_SIZES)}, or [width, height] in mm")
        return PAPER_SIZES[key]
    ok = (isinstance(value, list) and len(value) == 2
          and all(isinstance(v, (int, float)) and not isinstance(v, bool) and v > 0 for v in value))
    if not ok:
        raise StyleError(f"{at.path} must be a paper name such as 'A4' or [width, height] in mm, "
                         f"got {value!r}")
    return float(value[0]), float(value[1])


def _margins(value: Any, at: Scope) -> tuple[float, float, float, float]:
    """One number or [top, right, bottom, left], mm >= 0."""
    if isinstance(value, (int, float)) and not isinstance(value, bool) and value >= 0:
        return (float(value),) * 4
    ok = (isinstance(value, list) and len(value) == 4
          and all(isinstance(v, (int, float)) and not isinstance(v, bool) and v >= 0 for v in value))
    if not ok:
        raise StyleError(f"{at.path} must be mm >= 0 or [top, right, bottom, left], got {value!r}")
    return tuple(float(v) for v in value)  # type: ignore[return-value]


def _size_mm(value: Any, at: Scope) -> tuple[float, float]:
    ok = (isinstance(value, list) and len(value) == 2
          and all(isinstance(v, (int, float)) and not isinstance(v, bool) and v > 0 for v in value))
    if not ok:
        raise StyleError(f"{at.path} must be [width, height] in mm, got {value!r}")
    return float(value[0]), float(value[1])


def _place(value: Any, at: Scope) -> str:
    if value is False:
        return "off"
    return choice(PLACES, "place")(value, at)


@dataclass(frozen=True, slots=True, kw_only=True)
class ScaleBarSpec:
    """``scalebar = { place, units }``."""

    place: str = option(_place, "panel")
    units: str = option(choice(UNITS, "unit system"), "metric")


@dataclass(frozen=True, slots=True, kw_only=True)
class GridSpec:
    """``grid = { crs, step, lines }``: labelled ticks around the neat line every ``step`` units
    of ``crs`` (default the map's CRS; "EPSG:4326" gives a graticule in degrees); ``lines``
    also draws the grid across the map."""

    crs: str | None = option(string(), None)
    step: float = option(number(gt=0))
    lines: bool = option(boolean(), False)


def _scalebar(value: Any, at: Scope) -> ScaleBarSpec:
    if isinstance(value, (str, bool)):
        return ScaleBarSpec(place=_place(value, at))
    return build_from_table(ScaleBarSpec, as_table(value, at), at)


def _grid(value: Any, at: Scope) -> GridSpec:
    return build_from_table(GridSpec, as_table(value, at), at)


#: How the PDF embeds its fonts: "outlines" (each glyph used as a drawing procedure, a Type 3
#: font: quick to write, still real text for search and extraction) or "truetype" (subsets of
#: the TrueType files: what prepress checks prefer, about 1-2 s more per page).
PDF_FONTS = ("outlines", "truetype")


@dataclass(frozen=True, slots=True, kw_only=True)
class PageSpec:
    """``[page]``: see docs/style.md "Page". ``paper`` is portrait (w, h) mm before
    ``orientation``; ``scale`` is n of 1:n (None: the map frame fills the room left, or
    ``frame``); ``title`` None takes ``map.title``."""

    paper: tuple[float, float] = option(paper_size, PAPER_SIZES["A4"])
    orientation: str = option(choice(("portrait", "landscape"), "orientation"), "landscape")
    margin: tuple[float, float, float, float] = option(_margins, (10.0, 10.0, 10.0, 10.0))
    scale: float | None = option(number(gt=0), None)
    frame: tuple[float, float] | None = option(_size_mm, None)
    panel: str = option(choice(PANEL_SIDES, "panel side"), "auto")
    color: RGB = option(_color(), ui.PAPER.rgb)
    ink: RGB = option(_color(), ui.INK.rgb)
    title: str | None = option(string(), None)
    subtitle: str = option(string(), "")
    credits: str = option(string(), "")
    caution: str = option(string(), _CAUTION)
    legend: str = option(_place, "panel")
    north: str = option(_place, "panel")
    scalebar: ScaleBarSpec = option(_scalebar, factory=ScaleBarSpec)
    grid: GridSpec | None = option(_grid, None)
    neatline: bool = option(boolean(), True)
    pdf_fonts: str = option(choice(PDF_FONTS, "PDF font embedding"), "outlines")

    @property
    def size(self) -> tuple[float, float]:
        """(width, height) of the sheet in mm, orientation applied."""
        w, h = self.paper
        if (self.orientation == "landscape") == (w < h):
            return h, w
        return w, h


def parse_page(table: Any, at: Scope | None = None) -> PageSpec:
    """Validate a ``[page]`` table into a :class:`PageSpec`."""
    at = at or Scope("", ("page",))
    return build_from_table(PageSpec, as_table(table, at), at)
