"""Layer kinds: one options dataclass per kind and the registry :data:`LAYER_KINDS`.

Each options class *is* its schema: every field is declared with :func:`option` (its reader and
default), so the allowed keys, their types and defaults live in one place. Adding a layer kind
is one dataclass plus one :data:`LAYER_KINDS` entry. Colours are gamma-encoded sRGB floats in
[0, 1]; widths, sizes and offsets are typographic points (1/72 inch).
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any, Literal

import numpy as np

from compose.color.gamut import max_chroma
from compose.color.lab import lch_to_srgb, srgb_to_lch
from compose.color.parse import parse_color
from compose.errors import StyleError
from compose.style.validate import (RGB, Scope, as_table, build_from_table, choice, color,
                                    integer, number, numbers, option, option_keys,
                                    required_keys, scalars, string, table_of)

__all__ = [
    "RESAMPLING", "SHAPES", "WEIGHTS", "NODATA_TRANSPARENT", "DEFAULT_TINT", "DEFAULT_STROKE",
    "DEFAULT_TEXT", "DEFAULT_HALO", "default_shadow",
    "Halo", "ReliefOptions", "FieldOptions", "ClassesOptions", "LineOptions", "AreaOptions",
    "PointOptions", "LabelOptions", "LayerOptions", "KindSchema", "LAYER_KINDS",
]

#: Resampling methods of raster layers (names as rasterio spells them).
RESAMPLING = ("nearest", "bilinear", "cubic", "average", "mode")
#: Point marker shapes.
SHAPES = ("circle", "square")
#: Font weights by name (a number 100-900 is also accepted).
WEIGHTS = ("light", "normal", "medium", "semibold", "bold", "heavy")
#: ``nodata = "transparent"`` in a field layer: no-data pixels are left uncovered.
NODATA_TRANSPARENT = "transparent"

# Defaults: neutral, our own choice (common practice, no source).
DEFAULT_TINT: RGB = parse_color("#f3f0e8")
DEFAULT_STROKE: RGB = parse_color("#404040")      # L* ~27, neutral dark grey
DEFAULT_TEXT: RGB = parse_color("#303030")        # L* ~20
DEFAULT_HALO: RGB = parse_color("#ffffff")
_WHITE: RGB = (1.0, 1.0, 1.0)


def default_shadow(tint: RGB) -> RGB:
    """The default relief shadow: the tint at half its L* and half its C* (at most 6), same hue.

    Our own choice (no source): with the default strength 0.6 a tint of L* 95 shades down to about
    L* 66, inside the ground lightness budget. Chroma is capped to what sRGB shows at that L*.
    """
    L, C, h = (float(v) for v in srgb_to_lch(np.asarray(tint, dtype=float)))
    L2 = 0.5 * L
    C2 = min(0.5 * C, 6.0, float(max_chroma(L2, h)))
    rgb = np.clip(lch_to_srgb(np.array([L2, C2, h])), 0.0, 1.0)
    return tuple(float(v) for v in rgb)


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
    width: float = option(number(gt=0), 1.5)


_halo = table_of(Halo)


def _no_filter() -> Mapping[str, tuple]:
    return MappingProxyType({})


@dataclass(frozen=True, slots=True, kw_only=True)
class ReliefOptions:
    """Shaded relief. Angles in degrees (azimuth clockwise from north, altitude above the horizon);
    exaggeration multiplies elevations; ``directions`` evenly spaced suns around ``azimuth``;
    ground is drawn from ``tint`` (flat, lit) toward ``shadow`` by up to ``strength`` (0-1).
    ``shadow`` left as None becomes :func:`default_shadow` of the tint."""

    band: int = _band()
    resampling: str = _resampling("bilinear")
    azimuth: float = option(number(ge=0, le=360), 315.0, group="shade")
    altitude: float = option(number(gt=0, le=90), 45.0, group="shade")
    exaggeration: float = option(number(gt=0), 1.0, group="shade")
    directions: int = option(integer(ge=1), 1, group="shade")
    tint: RGB = option(color(), DEFAULT_TINT)
    shadow: RGB | None = option(color(), None)
    strength: float = option(number(ge=0, le=1), 0.6)

    def __post_init__(self) -> None:
        if self.shadow is None:
            object.__setattr__(self, "shadow", default_shadow(self.tint))


@dataclass(frozen=True, slots=True, kw_only=True)
class FieldOptions:
    """A continuous raster coloured through ``ramp``. ``nodata``: a colour, ``"transparent"``,
    or None for the ramp's own no-data colour."""

    band: int = _band()
    resampling: str = _resampling("bilinear")
    ramp: str = option(string())
    nodata: RGB | Literal["transparent"] | None = option(_nodata, None)


@dataclass(frozen=True, slots=True, kw_only=True)
class ClassesOptions:
    """A class raster coloured through the qualitative ``ramp``; unknown values are no-data,
    drawn in ``nodata`` (a colour, ``"transparent"``, or None for the ramp's own)."""

    band: int = _band()
    resampling: str = _resampling("mode")
    ramp: str = option(string())
    nodata: RGB | Literal["transparent"] | None = option(_nodata, None)


@dataclass(frozen=True, slots=True, kw_only=True)
class LineOptions:
    """Lines. ``table``: GeoPackage layer (None: the first); ``where``: attribute -> accepted
    values; ``width`` and ``dash`` (on, off, ...) in points."""

    table: str | None = option(string(), None)
    where: Mapping[str, tuple] = option(scalars(), factory=_no_filter)
    stroke: RGB = option(color(), DEFAULT_STROKE)
    width: float = option(number(gt=0), 0.5)
    dash: tuple[float, ...] | None = option(numbers(gt=0, even=True, min_count=2), None)
    halo: Halo | None = option(_halo, None)


@dataclass(frozen=True, slots=True, kw_only=True)
class AreaOptions:
    """Polygons. ``fill`` None leaves the inside open; ``width`` 0 draws no outline (points)."""

    table: str | None = option(string(), None)
    where: Mapping[str, tuple] = option(scalars(), factory=_no_filter)
    fill: RGB | None = option(color(), None)
    stroke: RGB = option(color(), DEFAULT_STROKE)
    width: float = option(number(ge=0), 0.5)
    halo: Halo | None = option(_halo, None)


@dataclass(frozen=True, slots=True, kw_only=True)
class PointOptions:
    """Point markers: ``size`` is the diameter in points; ``width`` 0 draws no outline."""

    table: str | None = option(string(), None)
    where: Mapping[str, tuple] = option(scalars(), factory=_no_filter)
    fill: RGB = option(color(), DEFAULT_STROKE)
    stroke: RGB = option(color(), _WHITE)
    width: float = option(number(ge=0), 0.5)
    size: float = option(number(gt=0), 4.0)
    shape: str = option(choice(SHAPES, "marker shape"), "circle")


@dataclass(frozen=True, slots=True, kw_only=True)
class LabelOptions:
    """Labels from attribute ``text``; larger ``priority`` attribute values are placed first.
    ``size`` and ``offset`` (to the upper right of the point) in points; ``font`` a family
    matplotlib knows; ``weight`` a name or 100-900."""

    table: str | None = option(string(), None)
    where: Mapping[str, tuple] = option(scalars(), factory=_no_filter)
    text: str = option(string())
    priority: str | None = option(string(), None)
    size: float = option(number(gt=0), 8.0)
    color: RGB = option(color(), DEFAULT_TEXT)
    halo: Halo | None = option(_halo, None)
    offset: float = option(number(), 3.0)
    font: str = option(string(), "DejaVu Sans")
    weight: str | int = option(_weight, "normal")


LayerOptions = (ReliefOptions | FieldOptions | ClassesOptions | LineOptions | AreaOptions
                | PointOptions | LabelOptions)


@dataclass(frozen=True, slots=True)
class KindSchema:
    """One layer kind: its name, options dataclass, whether it reads a raster and the roles a
    layer of this kind may play (the checker judges each role by its own rules, so a pair
    outside ``roles`` would silently skip them).

    The options class declares the allowed keys, their readers (types, ranges) and defaults.
    """

    name: str
    options: type
    raster: bool
    roles: tuple[str, ...] = ("ground", "theme", "overlay")

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


# Allowed roles: a relief is ground; a data raster is a theme (or a quiet ground, e.g. a land
# mask drawn through a pale ramp); marks and labels are overlays; areas are overlays or a ground
# (land and water fills under everything).
LAYER_KINDS: dict[str, KindSchema] = {
    "relief": KindSchema("relief", ReliefOptions, raster=True, roles=("ground",)),
    "field": KindSchema("field", FieldOptions, raster=True, roles=("theme", "ground")),
    "classes": KindSchema("classes", ClassesOptions, raster=True, roles=("theme", "ground")),
    "lines": KindSchema("lines", LineOptions, raster=False, roles=("overlay",)),
    "areas": KindSchema("areas", AreaOptions, raster=False, roles=("overlay", "ground")),
    "points": KindSchema("points", PointOptions, raster=False, roles=("overlay",)),
    "labels": KindSchema("labels", LabelOptions, raster=False, roles=("overlay",)),
}
