"""The built ramp: a continuous colour function of the data value (or a set of classes).

A continuous ramp is one or more :class:`Piece` s -- dense polylines of displayable CIELAB colours
at increasing data values (a sequential ramp has one piece; a diverging ramp two arms meeting at
its centre; a threshold ramp two pieces split at its break, the upper one starting exactly at
``at``). Between the knots (2049 per piece) colours are interpolated linearly in CIELAB.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from compose.color.lab import lab_to_srgb
from compose.ramps.spec import RampClass

if TYPE_CHECKING:
    from compose.ramps.lut import Lut

__all__ = ["RGB", "LCH", "Piece", "Ramp", "STEPPED_COLOR_RULE"]

RGB = tuple[float, float, float]   # gamma-encoded sRGB, floats in [0, 1]
LCH = tuple[float, float, float]   # CIE LCh(ab): L* 0-100, C*ab, h degrees

STEPPED_COLOR_RULE = (
    "class colours of a stepped sequential ramp are taken at evenly spaced positions "
    "(i + 0.5) / k along the ramp, so neighbouring classes are equally distinct whatever the breaks; "
    "of a stepped diverging or threshold ramp at the class-interval midpoints, where the data value "
    "(distance from the centre, side of the break) carries the meaning")


@dataclass(frozen=True, slots=True, eq=False)
class Piece:
    """A dense run of colours over data values [lo, hi) ([lo, hi] when ``closed``).

    ``values`` (k,) increasing from lo to hi; ``lab`` (k, 3) CIELAB of displayable colours;
    ``removed`` (k,) C*ab taken off by gamut mapping; ``matched`` (k,) C*ab taken off so twin
    ramps keep the same chroma.
    """

    lo: float
    hi: float
    values: np.ndarray
    lab: np.ndarray
    removed: np.ndarray
    matched: np.ndarray
    closed: bool = True

    def contains(self, v: np.ndarray) -> np.ndarray:
        """Boolean mask of the values this piece draws."""
        return (v >= self.lo) & ((v <= self.hi) if self.closed else (v < self.hi))

    def lab_at(self, v: np.ndarray) -> np.ndarray:
        """CIELAB (..., 3) at data values ``v`` (...), linear between knots, clamped to the piece."""
        v = np.asarray(v, dtype=float)
        return np.stack([np.interp(v, self.values, self.lab[:, j]) for j in range(3)], axis=-1)


@dataclass(frozen=True, slots=True, eq=False)
class Ramp:
    """A built colour ramp. Colours are gamma-encoded sRGB floats; stops CIE LCh(ab) triples.

    ``kind``: sequential | diverging | threshold | twin | qualitative. ``stops`` are the stops as
    given (threshold: the ``below`` stops, then the ``above`` ones; ``n_below`` says where they
    split). ``matched`` names the ramps kept at the same L* and C* (a base and its twins).
    ``base`` is the built base of a twin (None otherwise). ``steps`` / ``breaks`` make the drawn
    ramp stepped (see :data:`STEPPED_COLOR_RULE`); ``samples`` is the lookup-table size.
    """

    name: str
    kind: str
    domain: tuple[float, float]
    stops: tuple[LCH, ...]
    space: str
    outside_low: RGB     # drawn for finite values below the domain
    outside_high: RGB    # drawn for finite values above the domain
    nodata: RGB
    pieces: tuple[Piece, ...] = ()
    classes: tuple[RampClass, ...] = ()
    center: float | None = None
    at: float | None = None
    n_below: int = 0
    twin_of: str | None = None
    hue: tuple[float, float] | None = None
    matched: tuple[str, ...] = ()
    base: Ramp | None = field(default=None, repr=False)
    nodata_given: bool = False
    steps: int | None = None
    step_method: str = "equal"
    breaks: tuple[float, ...] | None = None
    samples: int = 1024
    path: Path | None = None
    values: tuple[float, ...] | None = None   # sequential: each stop's data value, when pinned
    listed_reversed: bool = False   # sequential: ``stops`` run opposite to the file's listing

    # --- continuous colour ----------------------------------------------------------------------

    @property
    def stepped(self) -> bool:
        """True when the drawn ramp is a set of classes over intervals (steps or breaks)."""
        return self.steps is not None or self.breaks is not None

    def lab_at(self, values) -> np.ndarray:
        """CIELAB (..., 3) of the continuous ramp at data ``values`` (...), clamped to the domain.

        NaN gives NaN. Not defined for qualitative ramps (use :meth:`colors_at`).
        """
        if self.kind == "qualitative":
            raise ValueError(f'ramp "{self.name}" is qualitative; it has no continuous colours')
        v = np.clip(np.asarray(values, dtype=float), *self.domain)
        out = np.full(v.shape + (3,), np.nan)
        for piece in self.pieces:
            mask = piece.contains(v)
            out[mask] = piece.lab_at(v[mask])
        return out

    def colors_at(self, x, *, fraction: bool = False) -> np.ndarray:
        """sRGB (..., 3) of the continuous ramp at data values ``x`` (...).

        With ``fraction=True`` ``x`` is a position 0-1 along the domain. Values below / above the
        domain give the ``outside`` low / high colour, NaN the nodata colour. Stepped ramps still answer
        with their continuous colours here; the lookup table (:meth:`lut`) draws the classes.
        Qualitative ramps: the colour of the class with that value (with ``fraction``, of class
        ``floor(x * n)``), nodata for values that are no class.
        """
        x = np.asarray(x, dtype=float)
        if self.kind == "qualitative":
            table = np.array([c.rgb for c in self.classes] + [self.nodata])
            values = np.array([c.value for c in self.classes])
            if fraction:
                idx = np.clip(np.floor(np.nan_to_num(x, nan=-1.0) * len(values)), 0, len(values) - 1)
                idx = np.where(np.isnan(x), len(values), idx).astype(int)
            else:
                hit = x[..., None] == values
                idx = np.where(hit.any(axis=-1), hit.argmax(axis=-1), len(values))
            return table[idx]
        lo, hi = self.domain
        v = lo + x * (hi - lo) if fraction else x
        rgb = np.clip(lab_to_srgb(self.lab_at(v)), 0.0, 1.0)
        rgb[v < lo] = self.outside_low
        rgb[v > hi] = self.outside_high
        rgb[np.isnan(v)] = self.nodata
        return rgb

    # --- classes --------------------------------------------------------------------------------

    def class_edges(self) -> np.ndarray | None:
        """Class edges (k + 1,) from the domain ends and ``breaks`` or equal ``steps``; None if not
        stepped. Quantile steps need data: see :meth:`compose.ramps.lut.Lut.with_quantile_breaks`
        (until then they are drawn as equal steps)."""
        lo, hi = self.domain
        if self.breaks is not None:
            return np.array([lo, *self.breaks, hi], dtype=float)
        if self.steps is not None:
            return np.linspace(lo, hi, self.steps + 1)
        return None

    def class_colors(self, edges: np.ndarray) -> np.ndarray:
        """sRGB (k, 3) of the k classes between ``edges`` (k + 1,) (see STEPPED_COLOR_RULE)."""
        edges = np.asarray(edges, dtype=float)
        k = len(edges) - 1
        if self.kind in ("sequential", "twin"):
            return self.colors_at((np.arange(k) + 0.5) / k, fraction=True)
        return self.colors_at((edges[:-1] + edges[1:]) / 2)

    # --- drawing --------------------------------------------------------------------------------

    def lut(self, samples: int | None = None) -> Lut:
        """The lookup table that draws this ramp (``samples`` entries, default ``self.samples``)."""
        from compose.ramps.lut import lut_for
        return lut_for(self, samples)
