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
"""
from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np

from compose.check.catalog import limit_of
from compose.check.context import CheckContext, layer_key
from compose.check.fixes import hex8, lch_rgb8
from compose.check.report import Change, RuleResult
from compose.check.stats import N_LIGHTNESS
from compose.color.cvd import simulate_cvd
from compose.color.lab import srgb_to_lab, srgb_to_lch

__all__ = ["MIN_PIXELS", "BANDS", "LIT_SHARE", "TwinGap", "twin_gaps", "ArmBands", "ArmGap", "arm_gaps",
           "diverging_themes",
           "drawn_colors", "drawn_lightness", "position_groups", "fill_gaps",
           "pooled_gap", "twin_lightness_map",
           "twin_lightness_map_deutan", "twin_lightness_map_protan", "diverging_symmetry_map",
           "diverging_symmetry_map_deutan", "diverging_symmetry_map_protan"]

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


def _limit(ctx: CheckContext, rule: str) -> float:
    return float(limit_of(rule, ctx.budgets)[0])


def _rule_id(base: str, vision: str) -> str:
    return base if vision == "normal" else f"{base}-{vision}"


def _neutral_ground_fix(ctx: CheckContext, vision: str, measure: str = "lightness"
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


def _twin_layers(ctx: CheckContext):
    """(twin ramp, twin layer (spec, stats), base layer (spec, stats)) for every twin whose base
    is drawn by a theme layer too."""
    firsts: dict[str, tuple] = {}
    for spec, s in ctx.layers("theme", ("field",)):
        name = getattr(spec.options, "ramp", None)
        if name is not None and name not in firsts and s.value_color is not None:
            firsts[name] = (spec, s)
    for r in ctx.used_ramps("theme"):
        if r.twin_of is None or r.base is None:
            continue
        if r.name in firsts and r.base.name in firsts:
            yield r, firsts[r.name], firsts[r.base.name]


@dataclass(frozen=True)
class TwinGap:
    """A twin and its base as drawn on the map: per-position values ``a`` and ``b`` (gaps
    filled), the pooled gap ``value`` (weighted p90), its position ``i`` of ``bands`` and the data
    value ``near`` at that position's centre."""
    ramp: Any           # the twin ramp (its .base is the base ramp)
    twin: Any           # the twin layer's spec
    base: Any           # the base layer's spec
    bands: int
    a: np.ndarray
    b: np.ndarray
    value: float
    i: int
    near: float


def twin_gaps(ctx: CheckContext, rule: str, limit: float,
              measure: Callable[..., tuple[np.ndarray, np.ndarray] | None]
              ) -> Iterator[TwinGap | RuleResult]:
    """For every twin drawn beside its base: a TwinGap of ``measure(stats, groups, bands)`` --
    (per-position values, weights) or None -- taken at equal positions along both ramps, or a
    passing "not measured" RuleResult when the two share no drawn position."""
    for r, (tspec, ts), (bspec, bs) in _twin_layers(ctx):
        bands = min(BANDS, ctx.lut(r).n, ctx.lut(r.base).n)     # equal positions along the ramps
        got_t = measure(ts, position_groups(len(ts.value_color), ctx.lut(r).n, bands), bands)
        got_b = measure(bs, position_groups(len(bs.value_color), ctx.lut(r.base).n, bands), bands)
        if got_t is None or got_b is None:
            continue
        (a, wa), (b, wb) = fill_gaps(*got_t), fill_gaps(*got_b)
        pooled = pooled_gap(a, b, wa, wb)
        if pooled is None:
            yield RuleResult(rule, tspec.name, None, limit, True,
                             f'"{tspec.name}" and "{bspec.name}" share no drawn position; '
                             "not measured", ramp=r.name)
            continue
        value, i = pooled
        lo, hi = r.domain
        yield TwinGap(r, tspec, bspec, bands, a, b, value, i, lo + (i + 0.5) / bands * (hi - lo))


def _twin_map(ctx: CheckContext, vision: str) -> list[RuleResult]:
    rule = _rule_id("twin-lightness-map", vision)
    limit = _limit(ctx, rule)
    out: list[RuleResult] = []
    for g in twin_gaps(ctx, rule, limit,
                       lambda s, groups, n: drawn_lightness(s, groups, n, vision)):
        if isinstance(g, RuleResult):
            out.append(g)
            continue
        r, tspec, bspec = g.ramp, g.twin, g.base
        passed = g.value <= limit
        msg = (f'|dL*| between "{tspec.name}" ({r.name}) and "{bspec.name}" ({r.base.name}) as '
               f"drawn on the map, in {vision} vision: p90 over {g.bands} positions {g.value:.2f} "
               f"(near {g.near:.3g}: L* {g.a[g.i]:.1f} vs {g.b[g.i]:.1f}); limit {limit:g}")
        fix, change = "", None
        if not passed:
            fix, change = _twin_fix(ctx, r, tspec, bspec, vision, limit, value=g.value)
        out.append(RuleResult(rule, f"{tspec.name}, {bspec.name}", g.value, limit, passed, msg,
                              fix, ramp=r.name, change=change))
    return out


def _palette_gap(ctx: CheckContext, a, b, vision: str) -> float:
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


def _own_gap_fix(gap: float, what: str, vision: str) -> str:
    return (f"in {vision} vision {what} already differ by up to {gap:.1f} L* before any layer is "
            "blended: lower their chroma (simulated dichromat lightness departs most for "
            "saturated reds and greens) or choose hues whose lightness holds in that vision")


def _twin_fix(ctx: CheckContext, r, tspec, bspec, vision: str, limit: float,
              own: tuple[float, str] | None = None, value: float | None = None,
              measure: str = "lightness") -> tuple[str, Change | None]:
    """The fix of a twin pair apart on the map; ``own``: (the ramps' own gap, its fix text) for
    a measure other than L* (default: their L* gap); ``value``: the gap measured on the map
    (for the opacity of a layer drawn over them, :mod:`compose.check.covering`)."""
    steps: list[tuple[str, Change]] = []
    order = [s.name for s in ctx.stats.layers]
    lower, upper = sorted((tspec, bspec), key=lambda sp: order.index(sp.name))
    if (ctx.nodata_color(lower) is not None and getattr(lower.options, "nodata", None) is not None
            and (bspec.blend != "normal" or bspec.opacity < 1.0)):
        # the lower twin paints its no-data colour where the upper twin has its data, and the
        # upper one (drawn like the base once matched) lets it through: the two twins then lie
        # on different grounds, which matching their blending cannot mend
        steps.append((f'"{lower.name}" paints its no-data colour beneath "{upper.name}", which '
                      f'lets it through: nodata = "transparent" on "{lower.name}"',
                      Change(layer_key(lower.name), {"nodata": "transparent"})))
    if abs(tspec.opacity - bspec.opacity) > 1e-9 or tspec.blend != bspec.blend:
        values: dict = {}
        if abs(tspec.opacity - bspec.opacity) > 1e-9:
            values["opacity"] = float(bspec.opacity)
        if tspec.blend != bspec.blend:
            values["blend"] = bspec.blend
        said = ", ".join(f"{k} = {v!r}" if isinstance(v, str) else f"{k} = {v:g}"
                         for k, v in values.items())
        steps.append((f'draw "{tspec.name}" as "{bspec.name}" is drawn: {said} (a twin blended '
                      "differently reads as another value)", Change(layer_key(tspec.name), values)))
    gap, text = own if own is not None else (_palette_gap(ctx, r, r.base, vision), "")
    if gap > limit and not steps:
        return text or _own_gap_fix(gap, f'the ramps "{r.name}" and "{r.base.name}"', vision), None
    steps += _blend_steps(ctx, [tspec, bspec], vision, measure)
    if not steps:
        from compose.check.covering import covering_step
        cover = None if value is None else covering_step(
            ctx, [tspec, bspec], value, limit, gap, f'"{tspec.name}" and "{bspec.name}"')
        if cover is not None:
            return cover
        return (f'draw "{tspec.name}" and "{bspec.name}" under the same layers (a layer blended '
                "over one twin only shifts its lightness)"), None
    seen: set = set()
    unique = []
    for text, change in steps:                 # one step per distinct edit
        key = (change.table, tuple(sorted(change.values.items())))
        if key not in seen:
            seen.add(key)
            unique.append((text, change))
    return _in_steps(unique)


def _blend_steps(ctx: CheckContext, specs, vision: str, measure: str = "lightness"
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
        text, change = _neutral_ground_fix(ctx, vision, measure)
        if change is not None:
            out.append((text, change))
    return out


def _theme_blend_steps(spec) -> list[tuple[str, Change]]:
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


def _in_steps(steps: list[tuple[str, Change]]) -> tuple[str, Change]:
    """One change now; the others named, for the next rounds of ``compose fix``."""
    if len(steps) == 1:
        return steps[0]
    rest = "; then, if still apart, ".join(t for t, _ in steps[1:])
    return f"two steps: first {steps[0][0]}; then, if still apart, {rest}", steps[0][1]


def twin_lightness_map(ctx: CheckContext) -> list[RuleResult]:
    """Twin and base as drawn on the map at equal positions: weighted p90 |dL*| <=
    ``budget.ramp.map_lightness`` (default 2; our design target, no source)."""
    return _twin_map(ctx, "normal")


def twin_lightness_map_deutan(ctx: CheckContext) -> list[RuleResult]:
    """The same under deutan simulation (Machado et al. 2009), limit ``map_lightness_cvd``."""
    return _twin_map(ctx, "deutan")


def twin_lightness_map_protan(ctx: CheckContext) -> list[RuleResult]:
    """The same under protan simulation (Machado et al. 2009), limit ``map_lightness_cvd``."""
    return _twin_map(ctx, "protan")


# --- diverging ------------------------------------------------------------------------------

@dataclass(frozen=True)
class ArmBands:
    """The palette entries of a diverging theme grouped by distance from the centre: ``groups``
    (n_entries,) band 0..half-1 on the low arm, half..2*half-1 on the high arm, -1 for the
    centre itself and the outside / no-data entries; ``center``, ``lo``, ``hi`` of the ramp."""
    groups: np.ndarray
    half: int
    center: float
    lo: float
    hi: float

    def near(self, k: int) -> tuple[float, float]:
        """The data values at the middle of band ``k`` on the low and on the high arm."""
        return (self.center - (k + 0.5) / self.half * (self.center - self.lo),
                self.center + (k + 0.5) / self.half * (self.hi - self.center))


def diverging_themes(ctx: CheckContext) -> Iterator[tuple[Any, Any, Any, ArmBands]]:
    """(spec, stats, ramp, bands) of every field theme drawn with a diverging ramp: each arm in
    :data:`BANDS` // 2 bands of equal distance from the centre, as a share of that arm's reach."""
    for spec, s in ctx.layers("theme", ("field",)):
        ramp = ctx.ramp_of(spec)
        if ramp is None or ramp.kind != "diverging" or s.values is None:
            continue
        n = ctx.lut(ramp).n
        values = np.asarray(s.values[:n], dtype=float)
        center = float(ramp.center if ramp.center is not None else sum(ramp.domain) / 2)
        lo, hi = (float(v) for v in ramp.domain)
        half = BANDS // 2
        reach = np.where(values < center, (center - values) / max(center - lo, 1e-12),
                         (values - center) / max(hi - center, 1e-12))
        band = np.minimum((np.clip(reach, 0.0, 1.0) * half).astype(int), half - 1)
        groups = np.full(len(s.values), -1, dtype=int)
        groups[:n] = np.where(values < center, band, half + band)
        groups[:n][np.abs(values - center) < 1e-12] = -1
        yield spec, s, ramp, ArmBands(groups, half, center, lo, hi)


@dataclass(frozen=True)
class ArmGap:
    """One diverging theme's arms as drawn: ``a`` / ``b`` (half,) the low / high arm's measure at
    each distance from the centre (gaps filled), the pooled gap ``value`` (weighted p90) and its
    band ``k``."""
    spec: Any
    ramp: Any
    arms: ArmBands
    a: np.ndarray
    b: np.ndarray
    value: float
    k: int


def arm_gaps(ctx: CheckContext, rule: str, limit: float,
             measure: Callable[..., tuple[np.ndarray, np.ndarray] | None]
             ) -> Iterator[ArmGap | RuleResult]:
    """For every diverging theme: an ArmGap of ``measure(stats, groups, 2 * half)`` -- (per-band
    values, weights) or None -- compared at equal distance from the centre, or a passing "not
    measured" RuleResult when the two arms share no drawn distance."""
    for spec, s, ramp, arms in diverging_themes(ctx):
        half = arms.half
        got = measure(s, arms.groups, 2 * half)
        if got is None:
            continue
        values, weights = got
        (a, wa), (b, wb) = fill_gaps(values[:half], weights[:half]), fill_gaps(values[half:],
                                                                               weights[half:])
        pooled = pooled_gap(a, b, wa, wb)
        if pooled is None:
            yield RuleResult(rule, spec.name, None, limit, True,
                             "the two arms share no drawn distance from the centre; not "
                             "measured", ramp=ramp.name)
            continue
        yield ArmGap(spec, ramp, arms, a, b, pooled[0], pooled[1])


def _diverging_map(ctx: CheckContext, vision: str) -> list[RuleResult]:
    rule = _rule_id("diverging-symmetry-map", vision)
    limit = _limit(ctx, rule)
    out: list[RuleResult] = []
    for g in arm_gaps(ctx, rule, limit, lambda s, groups, n: drawn_lightness(s, groups, n, vision)):
        if isinstance(g, RuleResult):
            out.append(g)
            continue
        spec, ramp, value, k = g.spec, g.ramp, g.value, g.k
        passed = value <= limit
        at_lo, at_hi = g.arms.near(k)
        msg = (f"|dL*| between the arms as drawn on the map, at equal distance from "
               f"{g.arms.center:g}, in {vision} vision: p90 over {g.arms.half} distances "
               f"{value:.2f} (near {at_lo:.3g} / {at_hi:.3g}: L* {g.a[k]:.1f} vs {g.b[k]:.1f}); "
               f"limit {limit:g}")
        fix, change = "", None
        own = _palette_gap(ctx, ramp, None, vision) if not passed else 0.0
        if not passed and own > limit:
            fix = _own_gap_fix(own, f'the arms of ramp "{ramp.name}"', vision)
        elif not passed:
            steps = _theme_blend_steps(spec)
            if steps:
                fix, change = _in_steps(steps)
            else:
                from compose.check.covering import covering_step
                cover = covering_step(ctx, [spec], value, limit, own,
                                      f'the arms of "{spec.name}"')
                fix, change = cover if cover is not None else (
                    f'the layers drawn with "{spec.name}" shade its arms unequally; check the '
                    f'ramp "{ramp.name}" in {vision} vision and the ground beneath', None)
        out.append(RuleResult(rule, spec.name, value, limit, passed, msg, fix, ramp=ramp.name,
                              change=change))
    return out


def diverging_symmetry_map(ctx: CheckContext) -> list[RuleResult]:
    """The two arms of a diverging theme as drawn on the map at equal distance from the centre:
    weighted p90 |dL*| <= ``budget.ramp.map_lightness`` (default 2; our design target)."""
    return _diverging_map(ctx, "normal")


def diverging_symmetry_map_deutan(ctx: CheckContext) -> list[RuleResult]:
    """The same under deutan simulation (Machado et al. 2009), limit ``map_lightness_cvd``."""
    return _diverging_map(ctx, "deutan")


def diverging_symmetry_map_protan(ctx: CheckContext) -> list[RuleResult]:
    """The same under protan simulation (Machado et al. 2009), limit ``map_lightness_cvd``."""
    return _diverging_map(ctx, "protan")
