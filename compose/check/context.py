"""What every rule reads: the style, its budgets, the built ramps and the render's statistics.

:class:`CheckContext` pairs each drawn layer's spec with its :class:`LayerStats` and answers
the questions several rules share (which ramp a layer draws, its lookup table, its drawn no-data
colour, which layers use a ramp). It computes nothing about the picture itself.
"""
from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from compose.check.stats import LayerStats, Statistics

__all__ = ["CheckContext", "THEME_RASTERS", "SEQUENTIAL_KINDS", "layer_key", "ramp_key"]

THEME_RASTERS = ("field", "classes")
#: Ramp kinds whose lightness should order the data (a twin is a sequential ramp with its own hue;
#: a threshold ramp continues its lightness across the break).
SEQUENTIAL_KINDS = ("sequential", "twin", "threshold")


def layer_key(name: str) -> str:
    """Key path of a layer table in messages and :class:`~compose.check.report.Change`."""
    return f'layer "{name}"'


def ramp_key(name: str) -> str:
    """Key path of a ramp table."""
    return f'ramp "{name}"'


@dataclass
class CheckContext:
    """The inputs of one check. ``specs``: the drawn layers' specs by name (drawing order)."""

    style: Any
    stats: Statistics
    ramps: dict
    budgets: Any
    specs: dict[str, Any]
    _luts: dict = field(default_factory=dict)
    _metrics: dict = field(default_factory=dict)
    _memo: dict = field(default_factory=dict)   # pure answers several rules ask for, per check

    @classmethod
    def build(cls, style, stats: Statistics, ramps: dict) -> CheckContext:
        specs = {spec.name: spec for spec in style.layers if getattr(spec, "enabled", True)}
        return cls(style=style, stats=stats, ramps=dict(ramps or {}), budgets=style.budgets,
                   specs=specs)

    # --- layers ---------------------------------------------------------------------------------

    def layers(self, role: str | None = None, kinds: tuple[str, ...] | None = None
               ) -> Iterator[tuple[Any, LayerStats]]:
        """(spec, stats) of the drawn layers, lowest first, optionally of one role / kinds."""
        for s in self.stats.layers:
            spec = self.specs.get(s.name)
            if spec is None:
                continue
            if role is not None and spec.role != role:
                continue
            if kinds is not None and spec.kind not in kinds:
                continue
            yield spec, s

    def coverage(self, s: LayerStats) -> float:
        """Coverage-weighted share (0-1) of the canvas the layer covers."""
        return float(s.covered) / max(1, self.stats.pixels)

    @property
    def background(self) -> tuple[float, float, float]:
        return tuple(float(v) for v in self.stats.background)

    @property
    def dpi(self) -> float:
        m = getattr(self.style, "map", None)
        return float(getattr(m, "dpi", 300.0) or 300.0)

    # --- ramps ----------------------------------------------------------------------------------

    def ramp_of(self, spec) -> Any | None:
        """The built ramp a layer draws through (None for layers without one)."""
        name = getattr(spec.options, "ramp", None)
        return self.ramps.get(name) if name is not None else None

    def lut(self, ramp) -> Any:
        """The ramp's lookup table (cached; what the raster layers draw)."""
        if ramp.name not in self._luts:
            self._luts[ramp.name] = ramp.lut()
        return self._luts[ramp.name]

    def metrics(self, ramp) -> Any:
        """:func:`compose.ramps.ramp_metrics` of the ramp (cached)."""
        if ramp.name not in self._metrics:
            from compose.ramps import ramp_metrics
            self._metrics[ramp.name] = ramp_metrics(ramp)
        return self._metrics[ramp.name]

    def ramp_users(self, name: str, role: str | None = None) -> list[str]:
        """Names of the drawn layers that use ramp ``name`` (optionally of one role)."""
        return [spec.name for spec, _ in self.layers(role)
                if getattr(spec.options, "ramp", None) == name]

    def used_ramps(self, role: str | None = None) -> list[Any]:
        """Built ramps used by drawn layers (optionally of one role), in style order."""
        used = {getattr(spec.options, "ramp", None) for spec, _ in self.layers(role)}
        return [r for n, r in self.ramps.items() if n in used]

    def nodata_color(self, spec) -> tuple[np.ndarray, str, str] | None:
        """The drawn no-data colour of a theme raster: (rgb8 (3,), key path, key), or None when
        no-data is transparent or the layer has no ramp. The key path says where to change it:
        the layer's ``nodata`` when the layer states it, else the ramp's."""
        ramp = self.ramp_of(spec)
        if ramp is None:
            return None
        nodata = getattr(spec.options, "nodata", None)
        if isinstance(nodata, str):            # "transparent"
            return None
        if nodata is not None:
            rgb8 = np.clip(np.rint(np.asarray(nodata, dtype=float) * 255), 0, 255).astype(np.uint8)
            return rgb8, layer_key(spec.name), "nodata"
        lut = self.lut(ramp)
        return np.asarray(lut.rgb8[lut.nodata_index], dtype=np.uint8), ramp_key(ramp.name), "nodata"

    def ramp_colors8(self, ramp) -> np.ndarray:
        """Every colour the ramp draws (8-bit, (n, 3)): its entries, plus under and over for
        continuous ramps (a qualitative ramp draws those in its no-data colour)."""
        lut = self.lut(ramp)
        stop = lut.n if ramp.kind == "qualitative" else lut.n + 2
        return np.asarray(lut.rgb8[:stop], dtype=np.uint8)
