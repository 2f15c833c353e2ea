"""Twin matching judged on the map: a twin ramp and its base as drawn, at equal positions along
the two ramps, in normal vision and under deutan and protan simulation (Machado, Oliveira &
Fernandes 2009). The measurement is :mod:`compose.check.on_map`'s."""
from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np

from compose.check.context import CheckContext, layer_key
from compose.check.on_map import (
    BANDS,
    blend_steps,
    drawn_lightness,
    fill_gaps,
    in_steps,
    own_gap_fix,
    palette_gap,
    pooled_gap,
    position_groups,
    rule_id,
    rule_limit,
)
from compose.check.report import Change, RuleResult

__all__ = ["TwinGap", "twin_gaps", "twin_fix", "twin_lightness_map", "twin_lightness_map_deutan",
           "twin_lightness_map_protan"]


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
              measure: Callable[..., tuple[np.ndarray, np.ndarray] | None],
              judge: Callable[[TwinGap], RuleResult]) -> list[RuleResult]:
    """For every twin drawn beside its base: ``judge`` of a TwinGap of ``measure(stats, groups,
    bands)`` -- (per-position values, weights) or None -- taken at equal positions along both
    ramps, or a passing "not measured" RuleResult when the two share no drawn position."""
    return [g if isinstance(g, RuleResult) else judge(g)
            for g in _gaps(ctx, rule, limit, measure)]


def _gaps(ctx: CheckContext, rule: str, limit: float,
          measure: Callable[..., tuple[np.ndarray, np.ndarray] | None]
          ) -> Iterator[TwinGap | RuleResult]:
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
    rule = rule_id("twin-lightness-map", vision)
    limit = rule_limit(ctx, rule)

    def judge(g: TwinGap) -> RuleResult:
        r, tspec, bspec = g.ramp, g.twin, g.base
        passed = g.value <= limit
        msg = (f'|dL*| between "{tspec.name}" ({r.name}) and "{bspec.name}" ({r.base.name}) as '
               f"drawn on the map, in {vision} vision: p90 over {g.bands} positions {g.value:.2f} "
               f"(near {g.near:.3g}: L* {g.a[g.i]:.1f} vs {g.b[g.i]:.1f}); limit {limit:g}")
        fix, change = "", None
        if not passed:
            fix, change = twin_fix(ctx, r, tspec, bspec, vision, limit, value=g.value)
        return RuleResult(rule, f"{tspec.name}, {bspec.name}", g.value, limit, passed, msg, fix,
                          ramp=r.name, change=change)

    return twin_gaps(ctx, rule, limit,
                     lambda s, groups, n: drawn_lightness(s, groups, n, vision), judge)


def twin_fix(ctx: CheckContext, r, tspec, bspec, vision: str, limit: float,
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
    gap, text = own if own is not None else (palette_gap(ctx, r, r.base, vision), "")
    if gap > limit and not steps:
        return text or own_gap_fix(gap, f'the ramps "{r.name}" and "{r.base.name}"', vision), None
    steps += blend_steps(ctx, [tspec, bspec], vision, measure)
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
    return in_steps(unique)


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
