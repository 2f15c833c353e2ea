"""The typed, frozen style: map, budgets, ramp tables and layers.

Each table's dataclass declares its keys with :func:`~compose.style.validate.option` (reader and
default), so :func:`~compose.style.validate.build_from_table` validates a TOML table into it and
the defaults below are the documented ones (docs/style.md). Layer options live in
:mod:`compose.style.kinds`. Colours are gamma-encoded sRGB floats in [0, 1].
"""
from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from compose.canvas import Canvas
from compose.composite import BLEND_MODES as BLEND_FUNCTIONS
from compose.errors import StyleError
from compose.limits import MAX_COORDINATE
from compose.names import name_problem
from compose.style.kinds import LayerOptions
from compose.style.validate import (
    RGB,
    Scope,
    as_table,
    build_from_table,
    choice,
    color,
    integer,
    missing_keys,
    number,
    option,
    pair,
    string,
    table_of,
)

__all__ = [
    "ROLES", "OUTSIDE", "BLEND_MODES", "MapSpec", "GroundBudget", "ThemeBudget", "OverlayBudget",
    "ClassesBudget", "NodataBudget", "RampBudget", "Budgets", "Waiver", "BUDGET_TABLES",
    "RampTable", "LayerSpec", "Style",
]

#: Values of ``map.outside``.
OUTSIDE = ("background", "transparent")
#: Layer roles, lowest in the visual hierarchy first.
ROLES = ("ground", "theme", "overlay")
#: Range of ``map.dpi``: below 10 a point is a fraction of a pixel, above 10,000 a 1 pt line is
#: 140 px wide (our own bounds, no source).
MIN_DPI, MAX_DPI = 10.0, 10000.0
#: Blend mode names (W3C Compositing and Blending Level 1, section 10).
BLEND_MODES = tuple(BLEND_FUNCTIONS)   # the W3C blend mode keywords compose draws


def _crs(value: Any, at: Scope) -> str:
    """A CRS string pyproj understands (kept as written)."""
    if not isinstance(value, str) or not value.strip():
        raise StyleError(f"{at.path} must be a CRS string such as 'EPSG:32631', got {value!r}")
    from compose.user_cache import crs_known, remember_crs

    if crs_known(value):        # accepted by this pyproj before: no import (compose.user_cache)
        return value
    from pyproj import CRS
    from pyproj.exceptions import CRSError
    try:
        crs = CRS.from_user_input(value)
    except CRSError as e:
        reason = " ".join(str(e).split())
        raise StyleError(f"{at.path}: {value!r} is not a CRS pyproj understands ({reason})") from None
    if crs.is_engineering or not (crs.is_geographic or crs.is_projected):
        raise StyleError(f"{at.path}: {value!r} is a {crs.type_name}; the canvas needs a "
                         f"geographic or projected CRS that data can be reprojected to")
    remember_crs(value)
    return value


def _extent(value: Any, at: Scope) -> tuple[float, float, float, float]:
    ok = (isinstance(value, list) and len(value) == 4
          and all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value))
    if not ok:
        raise StyleError(f"{at.path} must be 4 numbers [west, south, east, north], got {value!r}")
    west, south, east, north = (float(v) for v in value)
    if not all(math.isfinite(v) and abs(v) <= MAX_COORDINATE for v in (west, south, east, north)):
        raise StyleError(f"{at.path} must be finite numbers within +-{MAX_COORDINATE:g}, got {value!r}")
    if not (east > west and north > south):
        raise StyleError(f"{at.path}: need west < east and south < north, got {value!r}")
    return west, south, east, north


def _stem(value: Any, at: Scope) -> str:
    name = string()(value, at)
    problem = name_problem(name)
    if problem is not None:
        raise StyleError(f"{at.path} {problem} (it names the output files), got {value!r}")
    return name


@dataclass(frozen=True, slots=True, kw_only=True)
class MapSpec:
    """``[map]``: the output grid and what lies under the first layer.

    crs: as written (validated by pyproj); extent: (west, south, east, north) in CRS units, or in
    ``extent_crs`` when that is given; pixel: CRS units per output pixel (> 0), or ``width``:
    pixels across; like: the name of a raster layer whose CRS, extent and pixel size fill in
    whatever of those three is not stated (see :mod:`compose.style.grid`). outside: the
    GeoTIFF's alpha outside the data (see :data:`OUTSIDE`). dpi: dots per inch
    (> 0) for widths in points. name: the output stem if stated (else the style's file stem,
    see :attr:`Style.name`).
    """

    name: str | None = option(_stem, None)
    title: str = option(string(), "")
    crs: str | None = option(_crs, None)
    extent: tuple[float, float, float, float] | None = option(_extent, None)
    extent_crs: str | None = option(_crs, None)
    pixel: float | None = option(number(gt=0), None)
    width: int | None = option(integer(ge=1), None)
    like: str | None = option(string(), None)
    dpi: float = option(number(ge=MIN_DPI, le=MAX_DPI), 300.0)
    background: RGB = option(color(), (1.0, 1.0, 1.0))
    #: the GeoTIFF's alpha where no raster layer has data: "background" (opaque, the map as
    #: drawn) or "transparent" (alpha 0 there, 255 wherever some raster layer has data)
    outside: str = option(choice(OUTSIDE, "map.outside value"), "background")

    def __post_init__(self) -> None:
        if self.pixel is not None and self.width is not None:
            raise StyleError("map: give pixel (CRS units per pixel) or width (pixels across), not both")
        if self.like is None:
            missing = [k for k in ("crs", "extent") if getattr(self, k) is None]
            if self.pixel is None and self.width is None:
                missing.append("pixel")
            if missing:
                error = missing_keys(missing, Scope("", ("map",)))
                raise StyleError(f"{error} (pixel may be width, pixels across; or take the grid "
                                 "from a raster layer: like = \"layer name\")")


@dataclass(frozen=True, slots=True, kw_only=True)
class GroundBudget:
    """CIELAB L* range (p5 .. p95) and C*ab range (p95) of the ground's pixels."""

    lightness: tuple[float, float] = option(pair(ge=0, le=100), (55.0, 98.0))
    chroma: tuple[float, float] = option(pair(ge=0), (0.0, 12.0))
    relief_spread: float = option(number(ge=0, le=100), 10.0)


@dataclass(frozen=True, slots=True, kw_only=True)
class ThemeBudget:
    """Chroma of data colours: minimum (p50) and maximum (p95) C*ab; ``margin``: the ground's C*
    p95 stays at least this far below the themes' C* p50. The minimum is only enforced when
    ``chroma_min_stated`` (the style stated ``budget.theme.chroma``). ``gray_order``: least
    Spearman rho of value and composite L*. ``relief_overlap``: largest share (0-1) of a class's
    pixels the relief may shade into reading as the next darker class."""

    chroma: tuple[float, float] = option(pair(ge=0), (25.0, 130.0))
    margin: float = option(number(ge=0), 10.0)
    gray_order: float = option(number(ge=-1, le=1), 0.95)
    relief_overlap: float = option(number(ge=0, le=1), 0.10)
    chroma_min_stated: bool = False


@dataclass(frozen=True, slots=True, kw_only=True)
class OverlayBudget:
    """WCAG 2 contrast ratios (1-21) for marks and labels, the ``share`` (0-1] of an overlay's
    pixels that must reach them, the viewing distance in mm (0: size-aware test off) and the
    smallest label text size in points (common practice, no source)."""

    contrast: float = option(number(ge=1, le=21), 3.0)           # WCAG 2.1 SC 1.4.11
    label_contrast: float = option(number(ge=1, le=21), 4.5)     # WCAG 2.1 SC 1.4.3
    share: float = option(number(gt=0, le=1), 0.95)
    viewing_distance: float = option(number(ge=0), 0.0)
    text_size: float = option(number(gt=0, le=72), 6.0)


@dataclass(frozen=True, slots=True, kw_only=True)
class ClassesBudget:
    """Class count range (warning outside; common practice) and smallest pairwise CIEDE2000."""

    count: tuple[int, int] = option(pair(ge=1, whole=True), (5, 9))
    separation: float = option(number(ge=0), 10.0)


@dataclass(frozen=True, slots=True, kw_only=True)
class NodataBudget:
    """No-data C*ab ceiling and CIEDE2000 from every ramp colour (Brychtova & Coltekin 2016);
    ``area``: share (0-1) of the canvas from which a no-data area must also be quiet."""

    chroma: float = option(number(ge=0), 3.0)
    separation: float = option(number(ge=0), 10.0)
    area: float = option(number(ge=0, le=1), 0.10)


@dataclass(frozen=True, slots=True, kw_only=True)
class RampBudget:
    """Limits of the ramp-shape rules: step evenness (CV of CAM02-UCS steps at equal data steps,
    %), diverging symmetry and threshold continuity (|dL*|), neutral midpoint (C*ab), the break
    showing (dE00), twins (|dL*|, |dC*|, hue degrees); ``map_lightness`` / ``map_lightness_cvd``:
    |dL*| of twins and of diverging arms as drawn on the map (normal / simulated deutan, protan);
    ``map_chroma``: |dC*ab| of twins as drawn on the map (normal vision); ``map_arm_chroma``:
    |dC*ab| of a diverging theme's two arms at equal distance from the centre, as drawn."""

    evenness: float = option(number(ge=0), 10.0)
    symmetry: float = option(number(ge=0), 1.0)
    midpoint_chroma: float = option(number(ge=0), 5.0)
    break_lightness: float = option(number(ge=0), 1.0)
    break_difference: float = option(number(ge=0), 10.0)
    twin_lightness: float = option(number(ge=0), 1.0)
    twin_chroma: float = option(number(ge=0), 1.0)
    twin_hue: float = option(number(ge=0, le=180), 30.0)
    map_lightness: float = option(number(ge=0), 2.0)
    map_lightness_cvd: float = option(number(ge=0), 6.0)
    map_chroma: float = option(number(ge=0), 3.0)
    map_arm_chroma: float = option(number(ge=0), 3.0)


def _theme(value: Any, at: Scope) -> ThemeBudget:
    table = as_table(value, at)
    return build_from_table(ThemeBudget, table, at, chroma_min_stated="chroma" in table)


@dataclass(frozen=True, slots=True, kw_only=True)
class Budgets:
    """``[budget.*]``, one table per role plus classes and no-data; every key optional."""

    ground: GroundBudget = option(table_of(GroundBudget), factory=GroundBudget)
    theme: ThemeBudget = option(_theme, factory=ThemeBudget)
    overlay: OverlayBudget = option(table_of(OverlayBudget), factory=OverlayBudget)
    classes: ClassesBudget = option(table_of(ClassesBudget), factory=ClassesBudget)
    nodata: NodataBudget = option(table_of(NodataBudget), factory=NodataBudget)
    ramp: RampBudget = option(table_of(RampBudget), factory=RampBudget)
    stated: frozenset[str] = frozenset()   # "table.key" of every budget key the style stated

    def origin(self, key: str) -> str:
        """``"style"`` when the style stated budget ``key`` ("ground.chroma"), else ``"default"``."""
        return "style" if key in self.stated else "default"


#: The dataclass of each ``[budget.X]`` table.
BUDGET_TABLES: dict[str, type] = {"ground": GroundBudget, "theme": ThemeBudget,
                                  "overlay": OverlayBudget, "classes": ClassesBudget,
                                  "nodata": NodataBudget, "ramp": RampBudget}


@dataclass(frozen=True, slots=True)
class Waiver:
    """``[[waive]]``: rule ``rule`` is not applied to layer ``layer`` because of ``reason``
    (shown in every report)."""

    rule: str
    layer: str
    reason: str


@dataclass(frozen=True, slots=True)
class RampTable:
    """``[ramp.NAME]`` as written: a read-only deep copy (tables are read-only mappings, arrays
    tuples), validated by :mod:`compose.ramps`. ``path``: the last file that stated keys of it;
    ``base_dir``: its folder."""

    name: str
    table: Mapping[str, Any]
    path: Path
    base_dir: Path


@dataclass(frozen=True, slots=True)
class LayerSpec:
    """One ``[[layer]]``: common keys plus the kind's ``options`` (see :data:`LAYER_KINDS`).

    source: absolute path (relative paths resolved against the file that stated them; existence
    is not checked here). opacity in [0, 1]. Disabled layers are dropped while loading, so a
    loaded style only holds layers with ``enabled`` true.
    """

    name: str
    role: str
    kind: str
    source: Path
    blend: str
    opacity: float
    enabled: bool
    options: LayerOptions


@dataclass(frozen=True, slots=True)
class Style:
    """A loaded style. ``map`` is None only for a ramp library loaded with ``require_map=False``.

    path: the style file; name: the output stem (``map.name`` or the file stem); ramps by name in
    order of first appearance; layers lowest first; text: the raw text of the style file itself;
    chain: the files merged through ``extends``, the deepest base first, ending with ``path``.
    page: the ``[page]`` table (:class:`compose.page.spec.PageSpec`) or None.
    series: the members of ``[series]`` (variable -> value, in order); variables: the member this
    style was loaded for (its values filled into every string), or None.
    """

    path: Path
    name: str
    map: MapSpec | None
    budgets: Budgets
    ramps: Mapping[str, RampTable]
    layers: tuple[LayerSpec, ...]
    text: str
    chain: tuple[Path, ...]
    waivers: tuple[Waiver, ...] = ()
    page: Any = None
    series: tuple[Mapping[str, str], ...] = ()
    variables: Mapping[str, str] | None = None

    def avoided(self, spec: LayerSpec) -> tuple[LayerSpec, ...]:
        """The layers whose features the labels layer ``spec`` keeps off (its ``avoid``), in its
        order; a name of a disabled layer is passed over (a loaded style holds enabled layers
        only; the names were checked when it loaded, :func:`compose.style.load.check_avoid`)."""
        names = getattr(spec.options, "avoid", ()) if spec.kind == "labels" else ()
        by_name = {layer.name: layer for layer in self.layers}
        return tuple(by_name[n] for n in names if n in by_name)

    def canvas(self) -> Canvas:
        """The output grid of ``[map]`` (see :func:`compose.style.grid.plan_canvas`); with a
        ``[page]``, the grid filling its map frame (:func:`compose.page.layout.style_canvas`)."""
        return self.canvas_plan().canvas

    def canvas_plan(self):
        """The output grid and notes on how it was derived or rounded
        (:class:`compose.style.grid.CanvasPlan`)."""
        from compose.style.grid import plan_canvas
        plan = plan_canvas(self)
        if self.page is not None:
            from dataclasses import replace

            from compose.page.layout import style_canvas
            return replace(plan, canvas=style_canvas(self, plan.canvas)[0])
        return plan
