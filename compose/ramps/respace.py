"""Respace a sequential ramp's stops so lightness runs one way and equal data steps read evenly,
keeping the hues the user chose.

The fix of ``ramp-lightness-monotone`` and ``ramp-step-uniformity`` for a sequential ramp written
with ``through`` stops:

* every stop keeps its place in the list and its own hue (no hue is added or turned: a ramp from
  yellow through green to orange stays yellow, green, orange); between two stops the curve is the
  builder's shape-preserving interpolation in CAM02-UCS, whose hue runs from the one stop's hue
  to the next's without a detour (tested);
* lightness is re-spaced evenly from the lightest to the darkest stop, in the direction the ramp
  runs (first stop lighter than the last: falling); with stops pinned to data values, each
  stop's lightness is placed in proportion to its value, so equal data steps stay equal steps;
* each stop keeps its chroma where sRGB can show it at the new lightness;
* when the stops' hues turn back on themselves (e.g. 95 -> 140 -> 60 degrees), far values of the
  ramp look more alike than near ones and evenness can still fail: then every stop's chroma is
  lowered by one common factor, the largest that makes the built ramp pass
  (``ramp-step-uniformity``, measured by :func:`compose.ramps.metrics.evenness` on the ramp as
  built), so the hues stay and only their strength drops.

Pure functions of the stops; the ramp is built with the real builder to be measured.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from compose.color.gamut import max_chroma

__all__ = ["Respaced", "respace_stops", "GAMUT_MARGIN", "EVEN_MARGIN"]

GAMUT_MARGIN = 0.5   # C*ab kept below the sRGB edge so rounding to 8 bits stays inside
EVEN_MARGIN = 0.9    # aim at 90 % of the evenness limit: the lookup table's 8-bit rounding moves it


@dataclass(frozen=True)
class Respaced:
    """New stops (CIE LCh, the ramp's order), the common chroma factor applied (1: none), the
    evenness (CV %) of the ramp they build, and whether lightness falls along the ramp."""

    stops: tuple[tuple[float, float, float], ...]
    chroma_factor: float
    evenness: float
    falling: bool


def _stops(lch: np.ndarray, L: np.ndarray, k: float) -> tuple[tuple[float, float, float], ...]:
    C = lch[:, 1] * k
    h = lch[:, 2] % 360.0
    top = np.maximum(max_chroma(L, h) - GAMUT_MARGIN, 0.0)
    return tuple((round(float(a), 1), round(float(min(c, t)), 1), round(float(b), 1))
                 for a, c, b, t in zip(L, C, h, top, strict=True))


def _evenness(stops, space: str, domain: tuple[float, float],
              values: tuple[float, ...] | None = None) -> float:
    from compose.ramps.build import build_ramp
    from compose.ramps.metrics import evenness
    from compose.ramps.spec import RampSpec
    spec = RampSpec("respaced", "sequential", Path("respaced"), space,
                    (float(domain[0]), float(domain[1])),
                    through=tuple(stops), values=values)
    return evenness(build_ramp(spec))


def _lightness(Ls: np.ndarray, falling: bool, values: tuple[float, ...] | None) -> np.ndarray:
    """New L* per stop: evenly spaced from the lightest to the darkest stop, or, for stops pinned
    to data ``values`` (ascending), in proportion to each stop's value."""
    hi, lo = float(Ls.max()), float(Ls.min())
    if values is None or values[-1] <= values[0]:
        t = np.linspace(0.0, 1.0, len(Ls))
    else:
        v = np.asarray(values, dtype=float)
        t = (v - v[0]) / (v[-1] - v[0])
    return hi + (lo - hi) * t if falling else lo + (hi - lo) * t


def respace_stops(stops, space: str, domain: tuple[float, float], limit: float,
                  values: tuple[float, ...] | None = None) -> Respaced:
    """Stops (m, 3) CIE LCh in the ramp's order -> :class:`Respaced` (see the module docstring).

    ``limit``: the evenness limit (CV %, ``budget.ramp.evenness``); the stops aim at
    :data:`EVEN_MARGIN` of it. ``values``: the stops' pinned data values (ascending, in the
    ramp's order), kept. The chroma factor is searched by bisection in [0, 1] (steps
    of 1/64); 0 (grey stops) when no factor passes.
    """
    lch = np.asarray(stops, dtype=float)
    Ls = lch[:, 0]
    falling = bool(Ls[-1] < Ls[0])
    L = _lightness(Ls, falling, values)
    target = EVEN_MARGIN * float(limit)
    full = _stops(lch, L, 1.0)
    e = _evenness(full, space, domain, values)
    if e <= target:
        return Respaced(full, 1.0, e, falling)
    good, bad = 0.0, 1.0
    best = (_stops(lch, L, 0.0), _evenness(_stops(lch, L, 0.0), space, domain, values))
    while bad - good > 1.0 / 64:
        k = (good + bad) / 2
        cand = _stops(lch, L, k)
        ek = _evenness(cand, space, domain, values)
        if ek <= target:
            good, best = k, (cand, ek)
        else:
            bad = k
    return Respaced(best[0], round(good, 3), best[1], falling)
