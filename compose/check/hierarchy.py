"""Rules of the visual hierarchy by role: the ground stays light and muted, the themes keep the
saturation the ground leaves free, and no theme exceeds its chroma budget.

All numbers are CIELAB (D65) of the layers' own 8-bit colours, weighted by the pixels they cover
(:meth:`compose.check.stats.LayerStats.lightness_chroma`); a theme's no-data colour is left out.
Budgets are ``[budget.ground]`` and ``[budget.theme]`` of docs/style.md (common practice, no
source).
"""
from __future__ import annotations

import math

from compose.check.catalog import limit_of
from compose.check.context import CheckContext, layer_key
from compose.check.fixes import hex8, solve_relief_chroma, solve_relief_lightness, solve_relief_spread
from compose.check.report import Change, RuleResult
from compose.check.stats import weighted_percentiles
from compose.color.lab import srgb_to_lch
from compose.color.parse import to_rgb8

__all__ = ["ground_lightness", "ground_chroma", "relief_visible", "reserved_saturation",
           "theme_chroma", "theme_chroma_min"]


def _nan(v) -> bool:
    return v is None or (isinstance(v, float) and math.isnan(v))


def _relief_weights(spec, s):
    part = s.parts.get("shade")
    return None if (spec.kind != "relief" or part is None) else part.weights


def _chroma_fix(spec, s, target: float, what: str) -> tuple[str, Change | None]:
    """Fix for a ground whose C* p95 must come down to ``target``."""
    weights = _relief_weights(spec, s)
    if weights is not None:
        sol = solve_relief_chroma(spec.options, weights, target)
        if sol is not None:
            c_now = float(srgb_to_lch(spec.options.tint)[1])
            c_new = float(srgb_to_lch(sol["tint"])[1])
            values = {"tint": hex8(to_rgb8(sol["tint"]))}
            text = (f'lower the {spec.name} tint chroma from {c_now:.1f} to <= {c_new:.1f}: '
                    f'tint = "{values["tint"]}"')
            if sol["shadow"] is not None:
                values["shadow"] = hex8(to_rgb8(sol["shadow"]))
                text += f', shadow = "{values["shadow"]}"'
            return text + f" ({what} p95 becomes {sol['c95']:.1f})", Change(layer_key(spec.name), values)
    _, (_, _, c95) = s.lightness_chroma()
    k = target / c95 if c95 > 0 else 0.0
    return (f"scale the chroma of the {spec.name} colours by <= {math.floor(k * 100) / 100:.2f} "
            f"(C* p95 {c95:.1f} -> <= {target:.1f})", None)


def ground_lightness(ctx: CheckContext) -> list[RuleResult]:
    """Ground L* p5 and p95 inside ``budget.ground.lightness`` (default 55-98)."""
    lo, hi = (float(v) for v in ctx.budgets.ground.lightness)
    out = []
    for spec, s in ctx.layers("ground"):
        (p5, _, p95), _ = s.lightness_chroma()
        if _nan(p5):
            out.append(RuleResult("ground-lightness", spec.name, None, [lo, hi], True,
                                  "nothing drawn; not measured"))
            continue
        passed = p5 >= lo and p95 <= hi
        msg = f"L* p5 {p5:.1f}, p95 {p95:.1f}; budget {lo:g} to {hi:g}"
        fix, change = "", None
        weights = _relief_weights(spec, s)
        if not passed and weights is not None:
            sol = solve_relief_lightness(spec.options, weights, lo, hi)
            if sol is not None and sol["strength"] is not None:
                fix = (f"lower the {spec.name} strength from {spec.options.strength:g} to <= "
                       f"{sol['strength']:.2f} (L* p5 becomes {sol['p5']:.1f})")
                change = Change(layer_key(spec.name), {"strength": sol["strength"]})
            elif sol is not None:
                tint = hex8(to_rgb8(sol["tint"]))
                verb = "lower" if p95 > hi else "raise"
                fix = (f'{verb} the {spec.name} tint lightness to L* {srgb_to_lch(sol["tint"])[0]:.1f}: '
                       f'tint = "{tint}" (L* p5..p95 becomes {sol["p5"]:.1f}..{sol["p95"]:.1f})')
                change = Change(layer_key(spec.name), {"tint": tint})
            else:
                fix = "no tint lightness or strength brings both ends inside; widen the budget"
        elif not passed:
            fix = (f"bring the {spec.name} colours inside L* {lo:g}..{hi:g} "
                   f"(now {p5:.1f}..{p95:.1f})")
        out.append(RuleResult("ground-lightness", spec.name, [p5, p95], [lo, hi], passed, msg, fix,
                              change=change))
    return out


def ground_chroma(ctx: CheckContext) -> list[RuleResult]:
    """Ground C*ab p95 <= ``budget.ground.chroma[1]`` (default 12)."""
    limit = float(ctx.budgets.ground.chroma[1])
    out = []
    for spec, s in ctx.layers("ground"):
        _, (_, _, c95) = s.lightness_chroma()
        if _nan(c95):
            out.append(RuleResult("ground-chroma", spec.name, None, limit, True,
                                  "nothing drawn; not measured"))
            continue
        passed = c95 <= limit
        fix, change = ("", None) if passed else _chroma_fix(spec, s, limit - 0.2, "C*")
        out.append(RuleResult("ground-chroma", spec.name, c95, limit, passed,
                              f"C* p95 {c95:.1f}; budget <= {limit:g}", fix, change=change))
    return out


#: Least share of a relief that must show through the layers drawn normally over it (each
#: pixel counted by its coverage times what they let through): below it the relief is hidden
#: (our design choice, no source; a relief under data drawn at opacity 0.85 shows 0.15 of it).
MIN_SEEN = 0.05
#: The opacity a fix gives the layer that hides the relief: the data keep their lightness and a
#: hint of the relief shows through (as rule relief-shift proposes; common practice, no source).
SEEN_OPACITY = 0.85


def _hiding_layer(ctx: CheckContext, relief_name: str):
    """The layer drawn with blend "normal" over the relief that covers the most of the canvas
    at an opacity above :data:`SEEN_OPACITY` (None if there is none)."""
    names = [s.name for s in ctx.stats.layers]
    above = names[names.index(relief_name) + 1:]
    found = [(ctx.coverage(s), spec) for spec, s in ctx.layers()
             if spec.name in above and spec.role != "overlay" and spec.blend == "normal"
             and spec.opacity > SEEN_OPACITY]
    return max(found, key=lambda t: t[0])[1] if found else None


def _fainter_cover(ctx: CheckContext, relief_name: str, share: float
                   ) -> tuple[str, Change] | None:
    """Several layers drawn normally over the relief, none above :data:`SEEN_OPACITY`, hide it
    together (each lets 1 - opacity through, multiplied): the one covering most of the canvas
    made fainter so that twice :data:`MIN_SEEN` shows, assuming it lies over all of the relief
    (a share it covers less of needs less)."""
    names = [s.name for s in ctx.stats.layers]
    above = names[names.index(relief_name) + 1:]
    found = [(ctx.coverage(s) * spec.opacity, spec) for spec, s in ctx.layers()
             if spec.name in above and spec.kind != "labels" and spec.blend == "normal"
             and 0.0 < spec.opacity < 1.0]
    if not found or share <= 0.0:
        return None
    spec = max(found, key=lambda t: t[0])[1]
    through = (1.0 - spec.opacity) * 2.0 * MIN_SEEN / share
    a = max(0.0, math.floor((1.0 - through) * 100.0) / 100.0)
    return (f'the layers drawn over the {relief_name} together hide it: draw "{spec.name}" '
            f"fainter, opacity = {a:g} (now {spec.opacity:g}), so {2 * MIN_SEEN:.0%} of the "
            f"relief shows; or draw it with blend = \"multiply\"",
            Change(layer_key(spec.name), {"opacity": a}))


def _hidden_result(ctx, spec, s, share: float, limit: float, lo_L: float, hi_L: float
                   ) -> RuleResult:
    (p5, _, p95), _ = s.lightness_chroma()
    spread = p95 - p5
    hider = _hiding_layer(ctx, spec.name)
    msg = (f"hidden: {share:.1%} of the relief shows through the layers drawn over it (at least "
           f"{MIN_SEEN:.0%}); its own L* spread is {spread:.2f}")
    faint = _fainter_cover(ctx, spec.name, share) if hider is None else None
    if faint is not None:
        fix, change = faint
    elif hider is None:
        fix, change = (f"draw the layers over {spec.name} with a blend such as multiply, or move "
                       "the relief above them"), None
    else:
        fix = (f'draw "{hider.name}" over the {spec.name} at opacity = {SEEN_OPACITY:g} (now '
               f'{hider.opacity:g}, blend "normal" hides what lies beneath): the relief then shows '
               f'through; or blend = "multiply"')
        change = Change(layer_key(hider.name), {"opacity": SEEN_OPACITY})
        part = s.parts.get("shade")
        if spread < limit and part is not None:     # once seen, its own shading is too faint
            then, _ = _spread_fix(spec, part.weights, limit, lo_L, hi_L)
            fix = f"two steps: first {fix}; then {then}"
    return RuleResult("relief-visible", spec.name, 0.0, limit, False, msg, fix, change=change)


def relief_visible(ctx: CheckContext) -> list[RuleResult]:
    """A relief ground shows: L* p95 - p5 of its own shading where it shows on the map
    >= ``budget.ground.relief_spread`` (default 10; common practice, no source). Invisible
    relief is not a quiet ground, it is no ground at all: the reader sees a flat tint.

    "Where it shows": each pixel weighted by what the layers drawn over it with blend "normal"
    let through (1 - their alpha), so data drawn opaque over part of the relief leave only the
    rest to judge; a relief of which less than :data:`MIN_SEEN` shows at all is hidden (value 0)
    and the fix makes the layer hiding it partly transparent."""
    limit = float(limit_of("relief-visible", ctx.budgets)[0])
    lo_L = float(ctx.budgets.ground.lightness[0])
    hi_L = float(ctx.budgets.ground.lightness[1])
    out = []
    for spec, s in ctx.layers("ground", ("relief",)):
        part = s.parts.get("shade")
        (p5, _, p95), _ = s.lightness_chroma()
        if _nan(p5):
            continue
        weights = None if part is None else part.seen_weights
        share = 1.0 if part is None or part.seen is None else (
            float(part.seen.sum()) / max(float(part.weights.sum()), 1e-12))
        if share < MIN_SEEN:
            out.append(_hidden_result(ctx, spec, s, share, limit, lo_L, hi_L))
            continue
        if part is not None and part.seen is not None:      # the spread where it shows
            lch = srgb_to_lch(part.colors / 255.0)
            p5, _, p95 = weighted_percentiles(lch[:, 0], part.seen)
        spread = p95 - p5
        passed = spread >= limit
        where = "" if share >= 1.0 else f" where it shows ({share:.0%} of it)"
        msg = (f"L* p5 {p5:.1f} .. p95 {p95:.1f}{where}: spread {spread:.2f}; at least {limit:g} "
               "so the terrain reads")
        fix, change = "", None
        if not passed and weights is not None:
            fix, change = _spread_fix(spec, weights, limit, lo_L, hi_L)
        out.append(RuleResult("relief-visible", spec.name, spread, limit, passed, msg, fix,
                              change=change))
    return out


def _spread_fix(spec, weights, limit: float, lo_L: float, hi_L: float
                ) -> tuple[str, Change | None]:
    """Fix text and change for a relief whose L* spread must reach ``limit``."""
    sol = solve_relief_spread(spec.options, weights, limit, lo_L, hi_L=hi_L)
    o = spec.options
    if sol is None:
        return ("even strength 1, a 100x exaggeration and a lighter tint do not reach it: "
                "darken the shadow colour, or waive the rule for this layer if the terrain is "
                "truly flat"), None
    values: dict = {}
    steps = []
    if sol.get("tint") is not None:
        values["tint"] = hex8(to_rgb8(sol["tint"]))
        steps.append(f'raise the {spec.name} tint lightness from L* '
                     f'{float(srgb_to_lch(o.tint)[0]):.1f} to {float(srgb_to_lch(sol["tint"])[0]):.1f} '
                     f'(tint = "{values["tint"]}": room for shading above the ground\'s L* floor '
                     f'{lo_L:g})')
    if sol["exaggeration"] is not None:
        values["shade.exaggeration"] = sol["exaggeration"]
        steps.append(f"raise the {spec.name} shade exaggeration from {o.exaggeration:g} to "
                     f"{sol['exaggeration']:g}")
    if sol["strength"] != o.strength:
        values["strength"] = sol["strength"]
        steps.append(f"raise the {spec.name} strength from {o.strength:g} to {sol['strength']:g}")
    about = "about " if sol["exaggeration"] is not None else ""
    fix = "; ".join(steps) + f" (L* spread becomes {about}{sol['spread']:.1f}, p5 {sol['p5']:.1f})"
    return fix, Change(layer_key(spec.name), values)


def _theme_p50(ctx: CheckContext) -> list[tuple[str, float]]:
    out = []
    for spec, s in ctx.layers("theme"):
        _, (_, c50, _) = s.lightness_chroma(data_only=True)
        if not _nan(c50):
            out.append((spec.name, c50))
    return out


def reserved_saturation(ctx: CheckContext) -> list[RuleResult]:
    """Ground C* p95 + ``budget.theme.margin`` <= the smallest theme C* p50: saturation is kept
    for the data (common practice, no source)."""
    themes = _theme_p50(ctx)
    if not themes:
        return []
    margin = float(ctx.budgets.theme.margin)
    name, floor = min(themes, key=lambda t: t[1])
    out = []
    for spec, s in ctx.layers("ground"):
        _, (_, _, c95) = s.lightness_chroma()
        if _nan(c95):
            continue
        value = c95 + margin
        passed = value <= floor
        msg = (f"ground C* p95 {c95:.1f} + margin {margin:g} = {value:.1f}; the least saturated "
               f'theme "{name}" has C* p50 {floor:.1f}')
        fix, change = "", None
        if not passed:
            target = floor - margin
            if target > 0:
                fix, change = _chroma_fix(spec, s, target - 0.2, "C*")
                fix += f'; or raise the chroma of "{name}" to C* p50 >= {value:.1f}'
            else:
                fix = f'raise the chroma of "{name}" to C* p50 >= {value:.1f}'
        out.append(RuleResult("reserved-saturation", spec.name, value, floor, passed, msg, fix,
                              change=change))
    return out


def _ramp_hint(ctx: CheckContext, spec) -> str:
    ramp = ctx.ramp_of(spec)
    return f'ramp "{ramp.name}"' if ramp is not None else f"the {spec.name} colours"


def theme_chroma(ctx: CheckContext) -> list[RuleResult]:
    """Theme C*ab p95 <= ``budget.theme.chroma[1]`` (default 130)."""
    limit = float(ctx.budgets.theme.chroma[1])
    out = []
    for spec, s in ctx.layers("theme"):
        _, (_, _, c95) = s.lightness_chroma(data_only=True)
        if _nan(c95):
            continue
        passed = c95 <= limit
        fix = "" if passed else (f"scale the chroma of {_ramp_hint(ctx, spec)} by <= "
                                 f"{math.floor(limit / c95 * 100) / 100:.2f} (C* p95 {c95:.1f} -> "
                                 f"<= {limit:g})")
        out.append(RuleResult("theme-chroma", spec.name, c95, limit, passed,
                              f"C* p95 {c95:.1f}; budget <= {limit:g}", fix))
    return out


def theme_chroma_min(ctx: CheckContext) -> list[RuleResult]:
    """Theme C*ab p50 >= ``budget.theme.chroma[0]``, only when the style states that key."""
    tb = ctx.budgets.theme
    if not getattr(tb, "chroma_min_stated", False):
        return []
    limit = float(tb.chroma[0])
    out = []
    for spec, s in ctx.layers("theme"):
        _, (_, c50, _) = s.lightness_chroma(data_only=True)
        if _nan(c50):
            continue
        passed = c50 >= limit
        fix = "" if passed else (f"raise the chroma of {_ramp_hint(ctx, spec)} by >= "
                                 f"{math.ceil(limit / max(c50, 1e-6) * 100) / 100:.2f}x "
                                 f"(C* p50 {c50:.1f} -> >= {limit:g})")
        out.append(RuleResult("theme-chroma-min", spec.name, c50, limit, passed,
                              f"C* p50 {c50:.1f}; budget >= {limit:g} (stated)", fix))
    return out
