"""Twin matching and diverging symmetry judged on the map: the colours the reader sees after the
relief and every other layer are blended over the data, in normal vision and under deutan and
protan simulation (Machado, Oliveira & Fernandes 2009, severity 100, linear RGB).

The palette rules (``twin-lightness``, ``ramp-diverging-symmetry``) compare the ramps' own 8-bit
colours. A map can break what the palette keeps: a twin drawn at a lower opacity, a coloured
ground multiplied under the data (it darkens blue far more than brown), a layer drawn over one
twin but not the other. These rules compare, at equal ramp positions (twin vs base) or at equal
distance from the centre (the two arms of a diverging ramp), the *drawn lightness* of each
lookup-table entry, measured from the window histograms the render already merges:

* the entry's mean composite colour (linear-light sums, :meth:`LayerStats.composite_colors`),
  in the chosen vision, converted to L*;
* moved to the entry's lit end: plus (L* p90 - mean L*) of the entry's composite L* histogram.
  Terrain shades the data unevenly (low values may lie on the shaded hills, high ones on the
  flat coast); the p90 of a darkening relief is flat or sunlit ground, where the data colour is
  least altered, so terrain shading is not mistaken for a mismatch (how far shading moves a
  value is the ``relief-shift`` rule's business). The histogram has bins of 1 L*, so this term
  is good to about +-0.5 L*.

The value is the weighted p90 over positions of |dL*| (each position weighted by the smaller of
its two pixel counts; positions with fewer than :data:`MIN_PIXELS` sampled pixels on either side
are left out): single positions drawn on a few pixels do not decide the verdict. Limits:
``budget.ramp.map_lightness`` (default 2 L*: the palette's 1 L* plus the 1-L* bins it is measured
in; our design target, no source) and ``budget.ramp.map_lightness_cvd`` (default 6 L*: simulated
dichromat vision moves the L* of saturated hues by several units even for well matched ramps --
the library twins by 2.4-3.4 L*, its diverging ramp by 3.7-5.6 L*; our design target, no source).

This module holds the measurement both families share and the fix steps they share; the rules
themselves are in :mod:`compose.check.on_map_twins` and :mod:`compose.check.on_map_diverging`.
"""
from __future__ import annotations

import numpy as np

from compose.check.catalog import limit_of
from compose.check.context import CheckContext, layer_key
from compose.check.fixes import hex8, lch_rgb8
from compose.check.report import Change
from compose.check.stats import N_LIGHTNESS
from compose.color.cvd import simulate_cvd
from compose.color.lab import srgb_to_lab, srgb_to_lch

__all__ = ["MIN_PIXELS", "BANDS", "LIT_SHARE", "POOL_SHARE", "drawn_colors", "drawn_lightness",
           "position_groups", "fill_gaps", "pooled_gap", "rule_limit", "rule_id",
           "neutral_ground_fix", "palette_gap", "own_gap_fix", "blend_steps",
           "theme_blend_steps", "in_steps"]

MIN_PIXELS = 8.0     # sampled pixels a position needs on the map to be compared (our choice)
BANDS = 64           # positions compared along a ramp (each arm of a diverging one: half)
LIT_SHARE = 0.9      # the entry's lit end: its composite L* p90 (our choice, no source)
POOL_SHARE = 0.9     # the value is the weighted p90 of |dL*| over positions (our choice)
_L = np.arange(N_LIGHTNESS, dtype=float)

def drawn_colors(s, groups: np.ndarray, n_groups: int
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """(mean composite sRGB (n_groups, 3) in 0..1, L* shift to the lit end (n_groups,), sampled
    pixel count (n_groups,)) of groups of palette entries of a theme layer as drawn on the map
    (see the module docstring). ``groups`` (n_entries,): the group of each entry, -1 to leave
    it out. None when not measured."""
    if s.value_color is None or s.value_lightness is None:
        return None
    groups = np.asarray(groups)
    keep = groups >= 0
    g = groups[keep]
    count = s.value_count if s.value_count is not None else s.value_lightness.sum(axis=1)
    n = np.bincount(g, weights=np.asarray(count, dtype=float)[keep], minlength=n_groups)
    lin = np.stack([np.bincount(g, weights=s.value_color[keep, c], minlength=n_groups)
                    for c in range(3)], axis=-1)
    hist = np.zeros((n_groups, N_LIGHTNESS))
    np.add.at(hist, g, np.asarray(s.value_lightness, dtype=float)[keep])
    from compose.color.srgb import linear_to_srgb
    rgb = np.clip(linear_to_srgb(np.clip(lin / np.maximum(n, 1e-12)[:, None], 0.0, 1.0)), 0.0, 1.0)
    tot = hist.sum(axis=1)
    safe = np.maximum(tot, 1e-12)
    mean_h = (hist * _L).sum(axis=1) / safe
    cdf = np.cumsum(hist, axis=1) / safe[:, None]
    lit = np.minimum((cdf < LIT_SHARE - 1e-9).sum(axis=1), N_LIGHTNESS - 1).astype(float)
    # a layer drawn at opacity <= 0.5 has no L* histogram (it counts pixels where the layer is
    # more than half there): its mean colour is taken as it is
    return rgb, np.where(tot > 0, lit - mean_h, 0.0), n


def drawn_lightness(s, groups: np.ndarray, n_groups: int, vision: str = "normal"
                    ) -> tuple[np.ndarray, np.ndarray] | None:
    """(L* (n_groups,), sampled pixel count (n_groups,)) of groups of palette entries of a theme
    layer as drawn on the map, at their lit end (see the module docstring), in ``vision``
    (normal, deutan, protan); NaN where fewer than :data:`MIN_PIXELS` were sampled. ``groups``
    (n_entries,): the group of each entry, -1 to leave it out. None when not measured."""
    got = drawn_colors(s, groups, n_groups)
    if got is None:
        return None
    rgb, shift, n = got
    if vision != "normal":
        rgb = simulate_cvd(rgb, vision, 100.0)
    L = srgb_to_lab(np.clip(rgb, 0.0, 1.0))[:, 0] + shift
    L[n < MIN_PIXELS] = np.nan
    return L, n


def position_groups(n_entries: int, n_data: int, bands: int) -> np.ndarray:
    """Group (0..bands-1) of each of ``n_entries`` palette entries by its position along the ramp
    (the first ``n_data`` entries are the ramp; outside and no-data entries get -1)."""
    out = np.full(n_entries, -1, dtype=int)
    out[:n_data] = np.minimum(np.arange(n_data) * bands // max(n_data, 1), bands - 1)
    return out


def fill_gaps(L: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """A position with no drawn pixels between two drawn ones takes their mean L* and the smaller
    count (lightness runs smoothly along a ramp; sparse data, e.g. a few values sampled on a
    coarse grid, then still meet their mirror or twin)."""
    L, w = L.copy(), w.copy()
    gap = ~np.isfinite(L)
    gap[0] = gap[-1] = False
    inner = np.nonzero(gap)[0]
    ok = np.isfinite(L[inner - 1]) & np.isfinite(L[inner + 1]) if inner.size else inner
    for i in inner[ok] if inner.size else ():
        L[i] = (L[i - 1] + L[i + 1]) / 2
        w[i] = min(w[i - 1], w[i + 1])
    return L, w


def pooled_gap(a: np.ndarray, b: np.ndarray, wa: np.ndarray, wb: np.ndarray
               ) -> tuple[float, int] | None:
    """(weighted p90 of |a - b| over positions where both are finite, the position of the largest
    gap at or below it) or None when no position is shared. Weights: the smaller count."""
    both = np.isfinite(a) & np.isfinite(b)
    if not both.any():
        return None
    idx = np.nonzero(both)[0]
    gap = np.abs(a[idx] - b[idx])
    w = np.minimum(wa[idx], wb[idx])
    order = np.argsort(gap, kind="stable")
    cdf = np.cumsum(w[order]) / w.sum()
    k = order[min(int(np.searchsorted(cdf, POOL_SHARE - 1e-12)), order.size - 1)]
    return float(gap[k]), int(idx[k])


def rule_limit(ctx: CheckContext, rule: str) -> float:
    return float(limit_of(rule, ctx.budgets)[0])


def rule_id(base: str, vision: str) -> str:
    return base if vision == "normal" else f"{base}-{vision}"


def neutral_ground_fix(ctx: CheckContext, vision: str, measure: str = "lightness"
                        ) -> tuple[str, Change | None]:
    """A coloured ground multiplied under the data shifts hues by different amounts of L*: the
    fix makes the ground's tint neutral (a neutral multiply scales every channel alike, so equal
    L* stay about equal) and at least L* 88 (a dark grey still parts them, through sRGB's linear
    toe). ``measure`` "chroma": the same tint multiplied in shifts the chroma of hues unequally
    (a warm tint adds chroma to yellows and browns and takes it from blues)."""
    for spec, _s in ctx.layers("ground", ("relief",)):
        L, C, h = (float(v) for v in srgb_to_lch(np.asarray(spec.options.tint, dtype=float)))
        if C <= 3.0 and L >= 88.0:
            continue
        # neutral, and light: multiplying by a dark grey still parts blue and brown of one L*
        # (sRGB's linear toe), most at the dark end
        Ln = max(L, 88.0)
        new = hex8(lch_rgb8(np.array([Ln, 0.0, h])))
        said = "at the same L*" if Ln == L else f"and light (L* {Ln:.0f})"
        does = (f"darkens some hues more than others in {vision} vision" if measure != "chroma"
                else "multiplied under the data shifts the chroma of their hues unequally (a warm "
                "tint adds chroma to yellows and browns and takes it from blues, as drawn)")
        return (f'the {spec.name} tint (L* {L:.1f}, C* {C:.1f}) {does}: make it neutral {said}, '
                f'tint = "{new}"',
                Change(layer_key(spec.name), {"tint": new}))
    return "", None


def palette_gap(ctx: CheckContext, a, b, vision: str) -> float:
    """Largest |dL*| between the lookup-table colours of ramps ``a`` and ``b`` at equal positions
    (b None: the two arms of diverging ``a`` at equal distance from its centre), in ``vision``."""
    la = ctx.lut(a)
    rgb_a = la.rgb8[:la.n] / 255.0
    if b is None:
        rgb_b = rgb_a[::-1]
    else:
        lb = ctx.lut(b)
        pos = np.rint(np.arange(la.n) * (lb.n - 1) / max(la.n - 1, 1)).astype(int)
        rgb_b = lb.rgb8[pos] / 255.0
    if vision != "normal":
        rgb_a, rgb_b = simulate_cvd(rgb_a, vision, 100.0), simulate_cvd(rgb_b, vision, 100.0)
    return float(np.max(np.abs(srgb_to_lab(rgb_a)[:, 0] - srgb_to_lab(rgb_b)[:, 0])))


def own_gap_fix(gap: float, what: str, vision: str) -> str:
    return (f"in {vision} vision {what} already differ by up to {gap:.1f} L* before any layer is "
            "blended: lower their chroma (simulated dichromat lightness departs most for "
            "saturated reds and greens) or choose hues whose lightness holds in that vision")


def blend_steps(ctx: CheckContext, specs, vision: str, measure: str = "lightness"
                 ) -> list[tuple[str, Change]]:
    """Changes that make equal lightness stay equal once blended: a theme drawn at opacity < 1
    mixes its colours with what lies beneath in gamma-encoded sRGB, which moves blue and brown of
    one L* by different amounts (opacity 1); a coloured ground multiplied under the data does the
    same (a neutral tint)."""
    out = []
    for spec in specs:
        if spec.opacity < 1.0:
            out.append((f'draw "{spec.name}" opaque: opacity = 1 (mixed with what lies beneath, '
                        "colours of one L* drift apart)", Change(layer_key(spec.name),
                                                                 {"opacity": 1.0})))
    if any(s.blend != "normal" or s.opacity < 1.0 for s in specs):
        text, change = neutral_ground_fix(ctx, vision, measure)
        if change is not None:
            out.append((text, change))
    return out


def theme_blend_steps(spec) -> list[tuple[str, Change]]:
    """A diverging theme multiplied over the ground (or mixed with it at opacity < 1) takes the
    ground's darkening in gamma-encoded sRGB, which moves blue and brown of one L* by different
    amounts, most at the dark ends: drawn normally at opacity 0.85 its colours stay close to the
    ramp's while a hint of the relief still shows (common practice, no source); a theme drawn
    normally at a lower opacity is made opaque."""
    if spec.blend != "normal":
        return [(f'draw "{spec.name}" with blend = "normal", opacity = 0.85 (multiplied over the '
                 "ground, its arms darken unequally; normally drawn, a hint of the relief still "
                 "shows)", Change(layer_key(spec.name), {"blend": "normal", "opacity": 0.85}))]
    if spec.opacity < 1.0:
        return [(f'draw "{spec.name}" opaque: opacity = 1 (mixed with what lies beneath, colours '
                 "of one L* drift apart)", Change(layer_key(spec.name), {"opacity": 1.0}))]
    return []


def in_steps(steps: list[tuple[str, Change]]) -> tuple[str, Change]:
    """One change now; the others named, for the next rounds of ``compose fix``."""
    if len(steps) == 1:
        return steps[0]
    rest = "; then, if still apart, ".join(t for t, _ in steps[1:])
    return f"two steps: first {steps[0][0]}; then, if still apart, {rest}", steps[0][1]
