"""Diverging symmetry judged on the map: the two arms of a diverging theme as drawn, at equal
distance from the centre, in normal vision and under deutan and protan simulation (Machado,
Oliveira & Fernandes 2009). The measurement is :mod:`compose.check.on_map`'s."""
from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any

import numpy as np

from compose.check.context import CheckContext
from compose.check.on_map import (
    BANDS,
    drawn_lightness,
    fill_gaps,
    in_steps,
    own_gap_fix,
    palette_gap,
    pooled_gap,
    rule_id,
    rule_limit,
    theme_blend_steps,
)
from compose.check.report import RuleResult

__all__ = ["ArmBands", "ArmGap", "arm_gaps", "diverging_themes", "diverging_symmetry_map",
           "diverging_symmetry_map_deutan", "diverging_symmetry_map_protan"]


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
             measure: Callable[..., tuple[np.ndarray, np.ndarray] | None],
             judge: Callable[[ArmGap], RuleResult]) -> list[RuleResult]:
    """For every diverging theme: ``judge`` of an ArmGap of ``measure(stats, groups, 2 * half)``
    -- (per-band values, weights) or None -- compared at equal distance from the centre, or a
    passing "not measured" RuleResult when the two arms share no drawn distance."""
    return [g if isinstance(g, RuleResult) else judge(g)
            for g in _gaps(ctx, rule, limit, measure)]


def _gaps(ctx: CheckContext, rule: str, limit: float,
          measure: Callable[..., tuple[np.ndarray, np.ndarray] | None]
          ) -> Iterator[ArmGap | RuleResult]:
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
    rule = rule_id("diverging-symmetry-map", vision)
    limit = rule_limit(ctx, rule)

    def judge(g: ArmGap) -> RuleResult:
        spec, ramp, value, k = g.spec, g.ramp, g.value, g.k
        passed = value <= limit
        at_lo, at_hi = g.arms.near(k)
        msg = (f"|dL*| between the arms as drawn on the map, at equal distance from "
               f"{g.arms.center:g}, in {vision} vision: p90 over {g.arms.half} distances "
               f"{value:.2f} (near {at_lo:.3g} / {at_hi:.3g}: L* {g.a[k]:.1f} vs {g.b[k]:.1f}); "
               f"limit {limit:g}")
        fix, change = "", None
        own = palette_gap(ctx, ramp, None, vision) if not passed else 0.0
        if not passed and own > limit:
            fix = own_gap_fix(own, f'the arms of ramp "{ramp.name}"', vision)
        elif not passed:
            steps = theme_blend_steps(spec)
            if steps:
                fix, change = in_steps(steps)
            else:
                from compose.check.covering import covering_step
                cover = covering_step(ctx, [spec], value, limit, own,
                                      f'the arms of "{spec.name}"')
                fix, change = cover if cover is not None else (
                    f'the layers drawn with "{spec.name}" shade its arms unequally; check the '
                    f'ramp "{ramp.name}" in {vision} vision and the ground beneath', None)
        return RuleResult(rule, spec.name, value, limit, passed, msg, fix, ramp=ramp.name,
                          change=change)

    return arm_gaps(ctx, rule, limit, lambda s, groups, n: drawn_lightness(s, groups, n, vision),
                    judge)


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
