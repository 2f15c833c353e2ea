"""Layer kinds: one options dataclass per kind and the registry :data:`LAYER_KINDS`.

Each options class *is* its schema: every field is declared with :func:`option` (its reader and
default), so the allowed keys, their types and defaults live in one place. Adding a layer kind
is its module (options dataclass and renderer) plus one :data:`LAYER_KINDS` entry holding its
schema, its renderer, its legend entry and its measurement. Colours are gamma-encoded sRGB floats in
[0, 1]; widths, sizes and offsets are typographic points (1/72 inch).
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any, Literal

from compose.color.parse import parse_color
from compose.errors import StyleError
from compose.ramps.relief import default_shadow
from compose.style.validate import (
    RGB,
    Scope,
    as_table,
    boolean,
    build_from_table,
    choice,
    color,
    integer,
    number,
    numbers,
    option,
    option_keys,
    required_keys,
    scalars,
    string,
    table_of,
)

__all__ = [
    "RESAMPLING", "STRETCH", "SHAPES", "WEIGHTS", "NODATA_TRANSPARENT", "DEFAULT_TINT", "DEFAULT_STROKE",
    "DEFAULT_TEXT", "DEFAULT_HALO", "default_shadow",
    "Halo", "ReliefOptions", "FieldOptions", "ClassesOptions", "LineOptions", "AreaOptions",
    "PointOptions", "LabelOptions", "AVOIDABLE", "LayerOptions", "LayerKind", "KindSchema", "LAYER_KINDS",
    "LEGEND_ENTRIES", "MEASUREMENTS", "layer_kind", "layer_class",
]

#: Resampling methods of raster layers (names as rasterio spells them).
RESAMPLING = ("nearest", "bilinear", "cubic", "average", "mode")
#: ``shade.stretch``: "auto" normalises the shading by the DEM's own slope distribution
#: (:func:`compose.layers.hillshade.stretch_factor`); "none" draws Horn's shading as it is.
STRETCH = ("auto", "none")
#: Point marker shapes.
SHAPES = ("circle", "square")
#: Font weights by name (a number 100-900 is also accepted).
WEIGHTS = ("light", "normal", "medium", "semibold", "bold", "heavy")
#: ``nodata = "transparent"`` in a field layer: no-data pixels are left uncovered.
NODATA_TRANSPARENT = "transparent"
#: Largest width, size, dash or offset in points (7 inches; our own bound, no source).
MAX_POINTS = 500.0
#: Most suns of a multi-directional hillshade (each costs one shading pass; our own bound).
MAX_DIRECTIONS = 64

# Defaults: neutral, our own choice (common practice, no source).
DEFAULT_TINT: RGB = parse_color("#f3f0e8")
DEFAULT_STROKE: RGB = parse_color("#404040")      # L* ~27, neutral dark grey
DEFAULT_TEXT: RGB = parse_color("#303030")        # L* ~20
DEFAULT_HALO: RGB = parse_color("#ffffff")
_WHITE: RGB = (1.0, 1.0, 1.0)


def _resampling(default: str) -> Any:
    return option(choice(RESAMPLING, "resampling method"), default)


def _band() -> Any:
    return option(integer(ge=1), 1)


def _nodata(value: Any, at: Scope) -> RGB | str:
    if value == NODATA_TRANSPARENT:
        return NODATA_TRANSPARENT
    return parse_color(value, where=at.path)


def _weight(value: Any, at: Scope) -> str | int:
    if isinstance(value, int) and not isinstance(value, bool):
        if 100 <= value <= 900:
            return value
        raise StyleError(f"{at.path} must be between 100 and 900, got {value}")
    return choice(WEIGHTS, "font weight")(value, at)


@dataclass(frozen=True, slots=True, kw_only=True)
class Halo:
    """A halo drawn beneath a mark: colour and total width in points (> 0)."""

    color: RGB = option(color(), DEFAULT_HALO)
    width: float = option(number(gt=0, le=MAX_POINTS), 1.5)


_halo = table_of(Halo)


def _halo_or_off(value: Any, at: Scope) -> Halo | None:
    """A halo table, or ``false`` for none."""
    if value is False:
        return None
    return _halo(value, at)


def _no_filter() -> Mapping[str, tuple]:
    return MappingProxyType({})


#: Layer kinds whose features a labels layer's ``avoid`` may name: lines, and areas (their
#: outlines).
AVOIDABLE = ("lines", "areas")


def _layer_names(value: Any, at: Scope) -> tuple[str, ...]:
    """A list of layer names (each once); whether they name layers is checked with the whole
    style (:func:`compose.style.load.check_avoid`)."""
    if not isinstance(value, list) or not all(isinstance(v, str) and v.strip() for v in value):
        raise StyleError(f"{at.path} must be a list of layer names, got {value!r}")
    twice = sorted({v for v in value if value.count(v) > 1})
    if twice:
        raise StyleError(f"{at.path}: {', '.join(repr(v) for v in twice)} named more than once")
    return tuple(value)


@dataclass(frozen=True, slots=True, kw_only=True)
class ReliefOptions:
    """Shaded relief. Angles in degrees (azimuth clockwise from north, altitude above the horizon);
    exaggeration multiplies elevations (after ``stretch``: "auto" first scales them so ordinary
    terrain shows at any cell size); ``directions`` evenly spaced suns around ``azimuth``;
    ground is drawn from ``tint`` (flat, lit) toward ``shadow`` by up to ``strength`` (0-1).
    ``shadow`` left as None becomes :func:`default_shadow` of the tint."""

    band: int = _band()
    resampling: str = _resampling("bilinear")
    azimuth: float = option(number(ge=0, le=360), 315.0, group="shade")
    altitude: float = option(number(gt=0, le=90), 45.0, group="shade")
    exaggeration: float = option(number(gt=0, le=1e4), 1.0, group="shade")
    directions: int = option(integer(ge=1, le=MAX_DIRECTIONS), 1, group="shade")
    stretch: str = option(choice(STRETCH, "shade stretch"), "auto", group="shade")
    tint: RGB = option(color(), DEFAULT_TINT)
    shadow: RGB | None = option(color(), None)
    strength: float = option(number(ge=0, le=1), 0.6)

    def __post_init__(self) -> None:
        if self.shadow is None:
            object.__setattr__(self, "shadow", default_shadow(self.tint))


def _number_format(value: Any, at: Scope) -> str:
    """A Python format spec for numbers (".1f", ".3g", ",.0f"), checked on a number."""
    text = string()(value, at)
    try:
        format(1234.5, text)
    except (ValueError, TypeError):
        raise StyleError(f"{at.path}: {value!r} is not a number format such as '.1f' or '.3g'") from None
    return text


@dataclass(frozen=True, slots=True, kw_only=True)
class LegendKey:
    """``legend = { title, units, format, show, shaded }`` of a raster layer: the legend block's
    title (default the layer name), its units (shown after the title), a number format for its
    values (a Python format spec such as ".1f"; default up to 4 significant digits), for classes
    layers the class values to show (default all), and ``shaded``: draw the colour bar and
    swatches as the reader sees them under the style's relief (lit slope, flat, shaded slope;
    a slope stripe within CIEDE2000 2 of flat ground is merged into it, and the caption says so)."""

    title: str | None = option(string(), None)
    units: str = option(string(), "")
    format: str | None = option(_number_format, None)
    show: tuple[float, ...] | None = option(numbers(), None)
    shaded: bool = option(boolean(), False)


_legend_key = table_of(LegendKey)


@dataclass(frozen=True, slots=True, kw_only=True)
class FieldOptions:
    """A continuous raster coloured through ``ramp``. ``nodata``: a colour, ``"transparent"``,
    or None for the ramp's own no-data colour."""

    band: int = _band()
    resampling: str = _resampling("bilinear")
    ramp: str = option(string())
    nodata: RGB | Literal["transparent"] | None = option(_nodata, None)
    legend: LegendKey = option(_legend_key, factory=LegendKey)


@dataclass(frozen=True, slots=True, kw_only=True)
class ClassesOptions:
    """A class raster coloured through the qualitative ``ramp``; unknown values are no-data,
    drawn in ``nodata`` (a colour, ``"transparent"``, or None for the ramp's own)."""

    band: int = _band()
    resampling: str = _resampling("mode")
    ramp: str = option(string())
    nodata: RGB | Literal["transparent"] | None = option(_nodata, None)
    legend: LegendKey = option(_legend_key, factory=LegendKey)


@dataclass(frozen=True, slots=True, kw_only=True)
class LineOptions:
    """Lines. ``table``: GeoPackage layer (None: the first); ``where``: attribute -> accepted
    values; ``width`` and ``dash`` (on, off, ...) in points."""

    table: str | None = option(string(), None)
    where: Mapping[str, tuple] = option(scalars(), factory=_no_filter)
    stroke: RGB = option(color(), DEFAULT_STROKE)
    width: float = option(number(gt=0, le=MAX_POINTS), 0.5)
    dash: tuple[float, ...] | None = option(numbers(gt=0, le=MAX_POINTS, even=True, min_count=2), None)
    halo: Halo | None = option(_halo, None)


@dataclass(frozen=True, slots=True, kw_only=True)
class AreaOptions:
    """Polygons. ``fill`` None leaves the inside open; ``width`` 0 draws no outline (points)."""

    table: str | None = option(string(), None)
    where: Mapping[str, tuple] = option(scalars(), factory=_no_filter)
    fill: RGB | None = option(color(), None)
    stroke: RGB = option(color(), DEFAULT_STROKE)
    width: float = option(number(ge=0, le=MAX_POINTS), 0.5)
    halo: Halo | None = option(_halo, None)


@dataclass(frozen=True, slots=True, kw_only=True)
class PointOptions:
    """Point markers: ``size`` is the diameter in points; ``width`` 0 draws no outline."""

    table: str | None = option(string(), None)
    where: Mapping[str, tuple] = option(scalars(), factory=_no_filter)
    fill: RGB = option(color(), DEFAULT_STROKE)
    stroke: RGB = option(color(), _WHITE)
    width: float = option(number(ge=0, le=MAX_POINTS), 0.5)
    size: float = option(number(gt=0, le=MAX_POINTS), 4.0)
    shape: str = option(choice(SHAPES, "marker shape"), "circle")


@dataclass(frozen=True, slots=True, kw_only=True)
class LabelOptions:
    """Labels from attribute ``text``; larger ``priority`` attribute values are placed first.
    ``size`` and ``offset`` (to the upper right of the point) in points; ``font`` a family
    matplotlib knows; ``weight`` a name or 100-900. ``along``: names of line features follow
    their line glyph by glyph (upright, on a smooth stretch) every ``spacing`` points;
    ``follow`` (attribute -> accepted values, like ``where``): the pieces of the same table a
    selected name may run along (default: the selected features themselves). ``avoid``: names of
    the style's lines (or areas: their outlines) layers whose features point labels keep off
    where a free position allows (:func:`compose.layers.label_placement.place_labels`). Every
    label has a halo unless ``halo = false``."""

    table: str | None = option(string(), None)
    where: Mapping[str, tuple] = option(scalars(), factory=_no_filter)
    text: str = option(string())
    priority: str | None = option(string(), None)
    size: float = option(number(gt=0, le=MAX_POINTS), 8.0)
    color: RGB = option(color(), DEFAULT_TEXT)
    halo: Halo | None = option(_halo_or_off, factory=Halo)
    offset: float = option(number(ge=-MAX_POINTS, le=MAX_POINTS), 3.0)
    font: str = option(string(), "DejaVu Sans")
    weight: str | int = option(_weight, "normal")
    along: bool = option(boolean(), False)
    follow: Mapping[str, tuple] = option(scalars(), factory=_no_filter)
    spacing: float = option(number(gt=0, le=MAX_POINTS), 250.0)
    avoid: tuple[str, ...] = option(_layer_names, ())


LayerOptions = (ReliefOptions | FieldOptions | ClassesOptions | LineOptions | AreaOptions
                | PointOptions | LabelOptions)


#: How a kind shows in the legend (:mod:`compose.output.legend_layout`): a colour bar or class
#: swatches from its ramp, a sample mark drawn with its own options, or nothing.
LEGEND_ENTRIES = ("ramp", "line", "area", "marker", "text", "none")
#: How a kind is measured (:mod:`compose.measure`): ``"palette"`` counts lookup-table entries
#: (rasters), ``"ink"`` counts the coverage of flat colours and, as an overlay, their contrast.
MEASUREMENTS = ("palette", "ink")


def _resolve(ref: type | str) -> Any:
    """A class given itself or as ``"package.module:Name"`` (imported on first use)."""
    if not isinstance(ref, str):
        return ref
    import importlib

    module, _, name = ref.partition(":")
    return getattr(importlib.import_module(module), name)


@dataclass(frozen=True, slots=True)
class LayerKind:
    """One layer kind, everything about it in one registry entry.

    name: the style's ``kind``; options: its options dataclass (its schema: allowed keys, their
    readers and defaults), or ``"module:Class"``; layer: ``"module:Class"`` of the renderer
    (see :mod:`compose.layers.base`), imported only when a render needs it; raster: whether its
    source is a raster; legend: one of :data:`LEGEND_ENTRIES`; measure: one of
    :data:`MEASUREMENTS`; roles: the roles a layer of this kind may play (the checker judges
    each role by its own rules, so a pair outside ``roles`` would silently skip them); figure /
    outline: for overlays, the part judged as the mark and the
    part drawn beneath it (e.g. ``"stroke"`` over ``"halo"``), with the style key of the
    figure's colour.
    """

    name: str
    options_ref: type | str
    layer_ref: str
    raster: bool
    legend: str
    measure: str
    roles: tuple[str, ...] = ("ground", "theme", "overlay")
    figure: tuple[str, str] | None = None
    outline: str | None = None

    def __post_init__(self) -> None:
        if self.legend not in LEGEND_ENTRIES or self.measure not in MEASUREMENTS:
            raise ValueError(f"layer kind {self.name!r}: legend one of {LEGEND_ENTRIES}, "
                             f"measure one of {MEASUREMENTS}")

    @property
    def options(self) -> type:
        """The options dataclass."""
        return _resolve(self.options_ref)

    @property
    def layer(self) -> type:
        """The renderer class (imports its module)."""
        return _resolve(self.layer_ref)

    @property
    def keys(self) -> tuple[str, ...]:
        """Keys this kind adds to the common layer keys."""
        return option_keys(self.options)

    @property
    def required(self) -> tuple[str, ...]:
        """Keys of this kind without a default."""
        return required_keys(self.options)

    def parse(self, table: Mapping, at: Scope) -> Any:
        """Read the kind's keys of a layer table (common keys removed) into its options."""
        return build_from_table(self.options, as_table(table, at), at)


#: The former name of :class:`LayerKind`.
KindSchema = LayerKind

#: Every layer kind. Adding a kind: its module (options dataclass + renderer) and one line here.
# Allowed roles: a relief is ground; a data raster is a theme (or a quiet ground, e.g. a land
# mask drawn through a pale ramp); marks and labels are overlays; areas are overlays or a ground
# (land and water fills under everything).
LAYER_KINDS: dict[str, LayerKind] = {k.name: k for k in (
    LayerKind("relief", ReliefOptions, "compose.layers.relief:ReliefLayer", raster=True,
              legend="none", measure="palette", roles=("ground",)),
    LayerKind("field", FieldOptions, "compose.layers.raster:FieldLayer", raster=True,
              legend="ramp", measure="palette", roles=("theme", "ground")),
    LayerKind("classes", ClassesOptions, "compose.layers.raster:ClassesLayer", raster=True,
              legend="ramp", measure="palette", roles=("theme", "ground")),
    LayerKind("lines", LineOptions, "compose.layers.vector:LinesLayer", raster=False,
              legend="line", measure="ink", roles=("overlay",),
              figure=("stroke", "stroke"), outline="halo"),
    LayerKind("areas", AreaOptions, "compose.layers.vector:AreasLayer", raster=False,
              legend="area", measure="ink", roles=("overlay", "ground"),
              outline="halo"),
    LayerKind("points", PointOptions, "compose.layers.vector:PointsLayer", raster=False,
              legend="marker", measure="ink", roles=("overlay",),
              figure=("marker", "fill"), outline="stroke"),
    LayerKind("labels", LabelOptions, "compose.layers.label_layer:LabelsLayer", raster=False,
              legend="text", measure="ink", roles=("overlay",),
              figure=("text", "color"), outline="halo"),
    LayerKind("contours", "compose.layers.contours:ContourOptions",
              "compose.layers.contours:ContoursLayer", raster=True, legend="line", measure="ink",
              roles=("overlay",), figure=("stroke", "stroke"), outline="halo"),
)}


def layer_kind(kind: str) -> LayerKind:
    """The registry entry of layer ``kind`` (KeyError when there is none)."""
    return LAYER_KINDS[kind]


def layer_class(kind: str) -> type:
    """The renderer class of layer ``kind``."""
    return LAYER_KINDS[kind].layer
