"""Diverging symmetry in chroma, judged on the map: the chroma counterpart of
``diverging-symmetry-map``.

Values at equal distance either side of a diverging ramp's centre mean "as far from normal" and
must read as equally strong: equal lightness (``diverging-symmetry-map``) and equal chroma. This
rule compares, band by band of equal distance from the centre (as a share of each arm's reach,
:func:`compose.check.on_map_diverging.diverging_themes`), the *drawn chroma* C*ab of the two arms as the
reader sees them after every layer is blended, at each band's lit end
(:func:`compose.check.on_map_chroma.drawn_chroma`: the mean composite colour converted to CIELAB,
CIE 15:2004, its chroma moved to the band's lit end so terrain shading is not read as a
mismatch). The value is the weighted p90 over distances of |dC*ab|, as in the lightness rule.

Normal vision only, as ``twin-chroma-map``: the arms differ in hue by design, and a dichromat
simulation folds hue differences into chroma differences.

What breaks it: a palette whose arms differ in chroma at equal distance (the fix matches the
chroma of each pair of stops at equal distance from the midpoint, to the lower of the two); a
theme multiplied over a tinted ground (a warm ground takes chroma from a blue arm and adds it
to a brown one; the fix draws the theme normally); a tinted ground showing through; a layer
drawn over part of the data.
"""
from __future__ import annotations

import numpy as np

from compose.check.catalog import limit_of
from compose.check.context import CheckContext, ramp_key
from compose.check.covering import covering_step
from compose.check.on_map import in_steps, neutral_ground_fix, theme_blend_steps
from compose.check.on_map_chroma import _paper_step, drawn_chroma
from compose.check.on_map_diverging import ArmGap, arm_gaps
from compose.check.report import Change, RuleResult
from compose.color.gamut import max_chroma
from compose.color.lab import srgb_to_lch
from compose.color.parse import to_rgb8

__all__ = ["RULE", "arm_chroma_gap", "matched_stops", "diverging_chroma_map"]

RULE = "diverging-chroma-map"
GAMUT_MARGIN = 0.5     # C*ab kept below the sRGB edge so 8-bit rounding stays inside


def arm_chroma_gap(ramp, n: int = 129) -> float:
    """Largest |dC*ab| between the ramp's own 8-bit colours at equal distance from the centre
    (as a share of each arm's reach), before any layer is blended."""
    lo, hi = (float(v) for v in ramp.domain)
    c = float(ramp.center if ramp.center is not None else (lo + hi) / 2)
    d = np.linspace(0.0, 1.0, n)
    low = srgb_to_lch(to_rgb8(ramp.colors_at(c - d * (c - lo))) / 255.0)[:, 1]
    high = srgb_to_lch(to_rgb8(ramp.colors_at(c + d * (hi - c))) / 255.0)[:, 1]
    return float(np.max(np.abs(low - high)))


def matched_stops(stops) -> list[dict] | None:
    """A diverging ramp's stops (odd count, the midpoint in the middle) with each pair at equal
    distance from the midpoint given the lower of the two chromas (and no more than sRGB shows
    at either stop's lightness and hue); L* and hue kept. None when already matched."""
    st = np.asarray(stops, dtype=float)
    m = len(st)
    if m < 3 or m % 2 == 0:
        return None
    C = st[:, 1].copy()
    top = np.maximum(max_chroma(st[:, 0], st[:, 2]) - GAMUT_MARGIN, 0.0)
    for i in range(m // 2):
        j = m - 1 - i
        C[i] = C[j] = min(C[i], C[j], top[i], top[j])
    if np.allclose(C, st[:, 1]):
        return None
    return [{"L": round(float(L), 1), "C": round(float(c), 1), "h": round(float(h), 1)}
            for (L, _, h), c in zip(st, C, strict=True)]


def _fix(ctx: CheckContext, spec, ramp, value: float, limit: float) -> tuple[str, Change | None]:
    own = arm_chroma_gap(ramp)
    if own > limit:
        through = matched_stops(ramp.stops)
        text = (f'the arms of ramp "{ramp.name}" already differ by up to {own:.1f} C*ab at equal '
                "distance from the centre before any layer is blended")
        if through is None:
            return text + ": lower the chroma of the stronger arm where sRGB cuts the other", None
        listed = ", ".join(f"{{L = {t['L']:g}, C = {t['C']:g}, h = {t['h']:g}}}" for t in through)
        return (text + f": give each pair of stops at equal distance from the midpoint the lower "
                f"of their chromas, through = [{listed}]",
                Change(ramp_key(ramp.name), {"through": through}))
    text, neutral = neutral_ground_fix(ctx, "normal", "chroma")
    ground: list[tuple[str, Change]] = [] if neutral is None else [(text, neutral)]
    tinted = bool(ground)
    steps: list[tuple[str, Change]] = []
    if spec.blend != "normal":
        # drawn normally at 0.85 first (the relief still shows); then, if still apart, the
        # ground made neutral, as it still shows through a little
        steps = theme_blend_steps(spec) + ground
    elif spec.opacity < 1.0:
        # a tinted ground showing through a faint theme: neutral ground rather than an opaque
        # theme, which would hide the relief
        steps = ground if tinted else theme_blend_steps(spec)
    paper = _paper_step(ctx, "both arms")
    if paper is not None and steps:
        steps.append(paper)              # a coloured paper under a multiplied relief, last
    elif paper is not None and not tinted:
        steps = [paper]
    if steps:
        return in_steps(steps)
    cover = covering_step(ctx, [spec], value, limit, own, f'the arms of "{spec.name}"')
    if cover is not None:
        return cover
    return (f'the layers drawn with "{spec.name}" change the chroma of its arms unequally; '
            "check the ground beneath and the layers drawn over it"), None


def diverging_chroma_map(ctx: CheckContext) -> list[RuleResult]:
    """The two arms of a diverging theme as drawn on the map at equal distance from the centre:
    weighted p90 |dC*ab| <= ``budget.ramp.map_arm_chroma`` (our design target, no source)."""
    limit = float(limit_of(RULE, ctx.budgets)[0])

    def chroma(s, groups, n):
        got = drawn_chroma(s, groups, n)
        return None if got is None else (got[0], got[2])

    def judge(g: ArmGap) -> RuleResult:
        spec, ramp, value, k = g.spec, g.ramp, g.value, g.k
        passed = value <= limit
        at_lo, at_hi = g.arms.near(k)
        msg = (f"|dC*ab| between the arms as drawn on the map, at equal distance from "
               f"{g.arms.center:g}, at each distance's lit end: p90 over {g.arms.half} distances "
               f"{value:.2f} (near {at_lo:.3g} / {at_hi:.3g}: C*ab {g.a[k]:.1f} vs "
               f"{g.b[k]:.1f}); limit {limit:g}")
        fix, change = ("", None) if passed else _fix(ctx, spec, ramp, value, limit)
        return RuleResult(RULE, spec.name, value, limit, passed, msg, fix, ramp=ramp.name,
                          change=change)

    return arm_gaps(ctx, RULE, limit, chroma, judge)
