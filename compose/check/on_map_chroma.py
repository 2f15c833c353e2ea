"""Twin chroma judged on the map: the chroma counterpart of ``twin-lightness-map``.

The palette rule ``twin-chroma`` compares the twin ramps' own 8-bit colours. A map can break
what the palette keeps: a tinted layer drawn over one twin only, a twin drawn at a lower
opacity over a coloured ground, a coloured ground multiplied under the data. This rule compares,
at equal ramp positions (twin vs base), the *drawn chroma* C*ab of each group of lookup-table
entries, measured from the window histograms the render already merges, at the same statistic
``twin-lightness-map`` uses (:func:`compose.check.on_map.drawn_colors`):

* the group's mean composite colour (linear-light sums), converted to CIELAB (CIE 15:2004);
* moved to the group's lit end, where a darkening relief alters the data colour least. A
  neutral relief scales linear light by one factor; in CIELAB's cube-root region a uniform scale
  k of X, Y, Z multiplies (L* + 16), a* and b* alike by k^(1/3) (CIE 15:2004, the definitions
  of L*, a*, b*), so the lit end's chroma is C*mean x (L*lit + 16) / (L*mean + 16). Terrain
  shading is then not mistaken for a chroma mismatch.

The value is the weighted p90 over positions of |dC*ab| (weights, gaps and sparse positions as
in ``twin-lightness-map``). Limit ``budget.ramp.map_chroma`` (default 3 C*ab: the palette's
1 C*ab, plus the spread that 8-bit rounding, averaging shaded pixels and the lit-end estimate
(good to about +-0.5 L*, which moves C* by ~1 % per L*) add; our design target, no source).
Measured: the twins of styles/coast.toml 0.42 C*ab; matched test twins multiplied over a
neutral relief 0.67; the same over the relief's default warm tint (C* 4.2) 3.15 -- a real
shift (the yellow twin gains chroma, the blue one loses it), mended by a neutral tint. It is
what the reader sees, not an artefact of the lit-end estimate: on flat ground (no shading at
all) the rule reads 3.55 and colour-science on the rendered PNG's pixels 3.33 (p90 over the
rows of equal value); neutral, 0.51 and 0.54 (tests/check/test_on_map_chroma.py). About 1.2-1.4
CIEDE2000 of chroma alone at C* 30: a just-noticeable mismatch, which the budget exists for.

Normal vision only: twins differ in hue by design, and a dichromat simulation folds hue
differences into chroma differences, so a deutan or protan chroma gap between twins is the
palette's intent rather than the map's mismatch.
"""
from __future__ import annotations

import numpy as np

from compose.check.catalog import limit_of
from compose.check.context import CheckContext, layer_key
from compose.check.on_map import MIN_PIXELS, drawn_colors
from compose.check.on_map_twins import TwinGap, twin_fix, twin_gaps
from compose.check.report import Change, RuleResult
from compose.color.lab import srgb_to_lch

__all__ = ["drawn_chroma", "twin_chroma_map"]

RULE = "twin-chroma-map"


def drawn_chroma(s, groups: np.ndarray, n_groups: int
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """(C*ab (n_groups,), lit-end L* (n_groups,), sampled pixel count (n_groups,)) of groups of
    palette entries of a theme layer as drawn on the map, at their lit end (module docstring);
    NaN where fewer than :data:`MIN_PIXELS` were sampled. None when not measured."""
    got = drawn_colors(s, groups, n_groups)
    if got is None:
        return None
    rgb, shift, n = got
    lch = srgb_to_lch(np.clip(rgb, 0.0, 1.0))
    L = lch[:, 0]
    lit = L + shift
    # a uniform scale of linear light scales (L* + 16) and C*ab alike (CIE 15:2004 cube root)
    C = lch[:, 1] * np.clip(lit + 16.0, 0.0, None) / np.maximum(L + 16.0, 1e-9)
    C[n < MIN_PIXELS] = np.nan
    lit[n < MIN_PIXELS] = np.nan
    return C, lit, n


def _palette_chroma_gap(ctx: CheckContext, a, b) -> float:
    """Largest |dC*ab| between the lookup-table colours of ramps ``a`` and ``b`` at equal
    positions (what the palette rule ``twin-chroma`` sees)."""
    la, lb = ctx.lut(a), ctx.lut(b)
    pos = np.rint(np.arange(la.n) * (lb.n - 1) / max(la.n - 1, 1)).astype(int)
    ca = srgb_to_lch(la.rgb8[:la.n] / 255.0)[:, 1]
    cb = srgb_to_lch(lb.rgb8[pos] / 255.0)[:, 1]
    return float(np.max(np.abs(ca - cb)))


def _paper_step(ctx: CheckContext, what: str = "both twins") -> tuple[str, Change] | None:
    """A coloured paper shows through a relief multiplied over it (or drawn faint) and tints the
    ground beneath both twins, which moves the chroma of their hues unequally: the relief drawn
    normally and opaque hides the paper."""
    L, C, _h = (float(v) for v in srgb_to_lch(np.asarray(ctx.background, dtype=float)))
    if C <= 3.0:
        return None
    for spec, _s in ctx.layers("ground", ("relief",)):
        if spec.blend != "normal" or spec.opacity < 1.0:
            return (f'the paper (L* {L:.1f}, C* {C:.1f}) shows through "{spec.name}" and tints '
                    f'the ground under {what}: draw "{spec.name}" with blend = "normal", '
                    "opacity = 1", Change(layer_key(spec.name), {"blend": "normal",
                                                                 "opacity": 1.0}))
    return None


def _lit_chroma(s, groups: np.ndarray, n_groups: int) -> tuple[np.ndarray, np.ndarray] | None:
    """(lit-end C*ab per position, weights) from drawn_chroma, or None."""
    got = drawn_chroma(s, groups, n_groups)
    return None if got is None else (got[0], got[2])


def twin_chroma_map(ctx: CheckContext) -> list[RuleResult]:
    """Twin and base as drawn on the map at equal positions: weighted p90 |dC*ab| <=
    ``budget.ramp.map_chroma`` (default 3; our design target, no source)."""
    limit = float(limit_of(RULE, ctx.budgets)[0])

    def judge(g: TwinGap) -> RuleResult:
        r, tspec, bspec, value = g.ramp, g.twin, g.base, g.value
        passed = value <= limit
        msg = (f'|dC*ab| between "{tspec.name}" ({r.name}) and "{bspec.name}" ({r.base.name}) as '
               f"drawn on the map, at each position's lit end: p90 over {g.bands} positions "
               f"{value:.2f} (near {g.near:.3g}: C*ab {g.a[g.i]:.1f} vs {g.b[g.i]:.1f}); "
               f"limit {limit:g}")
        fix, change = "", None
        if not passed:
            own = _palette_chroma_gap(ctx, r, r.base)
            text = (f'the ramps "{r.name}" and "{r.base.name}" already differ by up to {own:.1f} '
                    "C*ab before any layer is blended: match their chroma (see the twin-chroma "
                    "rule)")
            fix, change = twin_fix(ctx, r, tspec, bspec, "normal", limit, own=(own, text),
                                   value=value, measure="chroma")
            paper = _paper_step(ctx) if change is None and own <= limit else None
            if paper is not None:
                fix, change = paper
        return RuleResult(RULE, f"{tspec.name}, {bspec.name}", value, limit, passed, msg, fix,
                          ramp=r.name, change=change)

    return twin_gaps(ctx, RULE, limit, _lit_chroma, judge)
