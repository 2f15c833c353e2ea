"""Rules about the ramps the layers draw: twins, threshold breaks, no-data colours, grayscale
order of the composite, ramp shape (classes: :mod:`compose.check.classes`).

Ramp measurements come from :func:`compose.ramps.ramp_metrics` (8-bit sampled colours); the
class, no-data and grayscale rules use the style's budgets and the render's statistics.
CVD: Machado, Oliveira & Fernandes (2009) matrices at severity 100, in linear RGB.
"""
from __future__ import annotations

import math

import numpy as np

from compose.check.catalog import limit_of
from compose.check.context import SEQUENTIAL_KINDS, CheckContext, ramp_key
from compose.check.fixes import hex8, solve_nodata
from compose.check.nodata_quiet import quiet_numbers, solve_quiet_nodata
from compose.check.report import WARNING, Change, RuleResult
from compose.check.stats import N_LIGHTNESS
from compose.color.difference import delta_e_2000
from compose.color.lab import srgb_to_lab, srgb_to_lch
from compose.color.parse import to_rgb8

__all__ = ["TWIN_HUE_GAP", "RHO_LIMIT", "twin_lightness", "twin_chroma", "twin_hue",
           "threshold_lightness", "nodata_chroma", "nodata_separation", "nodata_background",
           "grayscale_order", "ramp_lightness_monotone", "ramp_step_uniformity",
           "ramp_diverging_symmetry", "ramp_neutral_midpoint", "ramp_break_visible"]

TWIN_HUE_GAP = 30.0   # default of budget.ramp.twin_hue (our design target, no source)
RHO_LIMIT = 0.95      # default of budget.theme.gray_order (our design target, no source)
SAME_AS_BACKGROUND = 0.5  # dE00 under which a no-data colour *is* the background


def _metrics(ctx: CheckContext, ramp):
    return ctx.metrics(ramp)


def _subject(ctx: CheckContext, ramp) -> str | None:
    users = ctx.ramp_users(ramp.name)
    return ", ".join(users) if users else None


def _result(ctx, rule, ramp, value, limit, passed, msg, fix="", **kw) -> RuleResult:
    return RuleResult(rule, _subject(ctx, ramp), value, limit, passed, msg, fix, ramp=ramp.name, **kw)


# --- twins ----------------------------------------------------------------------------------

def _twins(ctx: CheckContext):
    return [r for r in ctx.used_ramps() if r.twin_of is not None and r.base is not None]


def _twin_match(ctx: CheckContext, rule: str, attr: str, what: str) -> list[RuleResult]:
    """|d<what>| <= the budget between each used twin and its base at equal positions."""
    limit = float(limit_of(rule, ctx.budgets)[0])
    out = []
    for r in _twins(ctx):
        v = getattr(_metrics(ctx, r), attr)
        out.append(_result(ctx, rule, r, v, limit, v <= limit,
                           f'largest |d{what}| against "{r.base.name}" {v:.2f}; limit {limit:g}',
                           "" if v <= limit else f'lower the chroma of "{r.base.name}" stops so '
                           "both hues can show it"))
    return out


def twin_lightness(ctx: CheckContext) -> list[RuleResult]:
    """|dL*| <= 1 between a twin and its base at equal positions (8-bit colours)."""
    return _twin_match(ctx, "twin-lightness", "twin_dl_max", "L*")


def twin_chroma(ctx: CheckContext) -> list[RuleResult]:
    """|dC*| <= 1 between a twin and its base at equal positions (8-bit colours)."""
    return _twin_match(ctx, "twin-chroma", "twin_dc_max", "C*")


def _hue_gap(a, b):
    return np.abs((np.asarray(b) - np.asarray(a) + 180.0) % 360.0 - 180.0)


def twin_hue(ctx: CheckContext) -> list[RuleResult]:
    """Twin hues >= 30 degrees from the base's at every position where both show a hue
    (C* >= 5; below that a hue is hardly seen)."""
    gap_limit = float(limit_of("twin-hue", ctx.budgets)[0])
    out = []
    t = np.linspace(0.0, 1.0, 257)
    for r in _twins(ctx):
        mine = srgb_to_lch(to_rgb8(r.colors_at(t, fraction=True)) / 255.0)
        theirs = srgb_to_lch(to_rgb8(r.base.colors_at(t, fraction=True)) / 255.0)
        seen = (mine[:, 1] >= 5) & (theirs[:, 1] >= 5)
        if not seen.any():
            out.append(_result(ctx, "twin-hue", r, None, gap_limit, True,
                               "both ramps are nearly grey (C* < 5): no hue to compare"))
            continue
        gap = float(_hue_gap(mine[seen, 2], theirs[seen, 2]).min())
        passed = gap >= gap_limit
        fix, change = "", None
        if not passed and r.hue is not None:
            planned = r.hue[0] + t * (r.hue[1] - r.hue[0])
            for d in sorted(range(-180, 181), key=abs):
                if _hue_gap(planned[seen] + d, theirs[seen, 2]).min() >= gap_limit + 1:
                    new = [round(r.hue[0] + d, 1), round(r.hue[1] + d, 1)]
                    fix = f'turn the hue of "{r.name}" by {d:+d} degrees: hue = {new}'
                    change = Change(ramp_key(r.name), {"hue": new})
                    break
        out.append(_result(ctx, "twin-hue", r, gap, gap_limit, passed,
                           f'smallest hue difference from "{r.base.name}" {gap:.1f} deg '
                           f"(where both C* >= 5); at least {gap_limit:g}", fix, change=change))
    return out


# --- threshold ----------------------------------------------------------------------------

def threshold_lightness(ctx: CheckContext) -> list[RuleResult]:
    """|dL*| <= 1 across the break of threshold ramps drawn by theme layers (8-bit colours of
    the lookup-table entries on either side)."""
    out = []
    limit = float(limit_of("threshold-lightness", ctx.budgets)[0])
    for r in ctx.used_ramps("theme"):
        if r.kind != "threshold":
            continue
        m = _metrics(ctx, r)
        passed = m.break_dl <= limit
        fix, change = "", None
        if not passed and r.n_below and len(r.stops) > r.n_below:
            last_below, first_above = r.stops[r.n_below - 1], r.stops[r.n_below]
            new = {"L": round(last_below[0], 1), "C": first_above[1], "h": first_above[2]}
            fix = (f"give the first 'above' stop the L* of the last 'below' stop: "
                   f"{{L = {new['L']:g}, C = {new['C']:g}, h = {new['h']:g}}}")
            change = Change(ramp_key(r.name) + ".above[0]", new)
        out.append(_result(ctx, "threshold-lightness", r, m.break_dl, limit, passed,
                           f"|dL*| across the break at {r.at:g}: {m.break_dl:.2f}; limit {limit:g} "
                           f"(dE00 {m.break_de00:.1f}, hue change {m.break_dh:.0f} deg)", fix,
                           change=change))
    return out


# --- no-data ----------------------------------------------------------------------------------

def _nodata_cases(ctx: CheckContext):
    for spec, s in ctx.layers("theme", ("field", "classes")):
        got = ctx.nodata_color(spec)
        ramp = ctx.ramp_of(spec)
        if got is None or ramp is None:
            continue
        rgb8, table, key = got
        yield spec, s, ramp, rgb8, table, key


def _nodata_fix(ctx, ramp, rgb8, table, key, s=None) -> tuple[str, Change | None]:
    nb = ctx.budgets.nodata
    q = quiet_numbers(ctx, s, rgb8) if s is not None else None
    if q is not None and q.share >= float(nb.area):
        # a large no-data area: the colour proposed is also quiet (rule nodata-quiet)
        quiet = solve_quiet_nodata(ctx, ramp, rgb8, q)
        if quiet is not None:
            L, C, _ = srgb_to_lch(quiet / 255.0)
            return (f'{key} = "{hex8(quiet)}" in {table} (L* {L:.1f}, C* {C:.1f}: neutral, and '
                    "light enough to recede on the large no-data area)",
                    Change(table, {key: hex8(quiet)}))
    new = solve_nodata(rgb8, ctx.ramp_colors8(ramp), ctx.background, float(nb.chroma),
                       float(nb.separation))
    if new is None:
        return "no colour of that hue and chroma is far enough from every ramp colour", None
    L, C, _ = srgb_to_lch(new / 255.0)
    return (f'{key} = "{hex8(new)}" in {table} (L* {L:.1f}, C* {C:.1f})',
            Change(table, {key: hex8(new)}))


def nodata_chroma(ctx: CheckContext) -> list[RuleResult]:
    """Drawn no-data colour C*ab <= ``budget.nodata.chroma`` (default 3): no-data is not data."""
    limit = float(ctx.budgets.nodata.chroma)
    out = []
    for spec, s, ramp, rgb8, table, key in _nodata_cases(ctx):
        C = float(srgb_to_lch(rgb8 / 255.0)[1])
        passed = C <= limit
        fix, change = ("", None) if passed else _nodata_fix(ctx, ramp, rgb8, table, key, s)
        out.append(RuleResult("nodata-chroma", spec.name, C, limit, passed,
                              f'no-data "{hex8(rgb8)}" C* {C:.1f}; limit {limit:g}', fix,
                              ramp=ramp.name, change=change))
    return out


def nodata_separation(ctx: CheckContext) -> list[RuleResult]:
    """Drawn no-data colour >= ``budget.nodata.separation`` dE00 (default 10, Brychtova &
    Coltekin 2016) from every colour of its ramp."""
    limit = float(ctx.budgets.nodata.separation)
    out = []
    for spec, s, ramp, rgb8, table, key in _nodata_cases(ctx):
        lab = srgb_to_lab(rgb8 / 255.0)
        d = float(delta_e_2000(lab, srgb_to_lab(ctx.ramp_colors8(ramp) / 255.0)).min())
        passed = d >= limit
        fix, change = ("", None) if passed else _nodata_fix(ctx, ramp, rgb8, table, key, s)
        out.append(RuleResult("nodata-separation", spec.name, d, limit, passed,
                              f'no-data "{hex8(rgb8)}" is {d:.1f} dE00 from the nearest colour of '
                              f'ramp "{ramp.name}"; at least {limit:g}', fix, ramp=ramp.name,
                              change=change))
    return out


def nodata_background(ctx: CheckContext) -> list[RuleResult]:
    """Drawn no-data colour either *is* the background (< 0.5 dE00: no-data reads as blank map,
    a deliberate choice) or lies >= ``budget.nodata.separation`` dE00 from it. In between it reads
    as a faint stain that is neither blank nor a symbol."""
    limit = float(ctx.budgets.nodata.separation)
    bg = srgb_to_lab(np.asarray(ctx.background))
    out = []
    for spec, s, ramp, rgb8, table, key in _nodata_cases(ctx):
        d = float(delta_e_2000(srgb_to_lab(rgb8 / 255.0), bg))
        same = d < SAME_AS_BACKGROUND
        passed = same or d >= limit
        why = ("the same as the background: no-data reads as blank map" if same else
               f"{d:.1f} dE00 from the background; at least {limit:g} (or equal to it), so it does "
               "not read as a faint stain")
        fix, change = ("", None) if passed else _nodata_fix(ctx, ramp, rgb8, table, key, s)
        out.append(RuleResult("nodata-background", spec.name, d, limit, passed,
                              f'no-data "{hex8(rgb8)}" is {why}', fix, ramp=ramp.name, change=change))
    return out


# --- grayscale order ------------------------------------------------------------------------

def _spread(table: np.ndarray, values: np.ndarray) -> tuple[float, float]:
    """(between-value variance, within-value variance) of composite L* over a value x L* table."""
    keep = np.isfinite(values) & (table.sum(axis=1) > 0)
    t = table[keep]
    L = np.arange(N_LIGHTNESS, dtype=float)
    w = t.sum(axis=1)
    W = w.sum()
    means = (t * L).sum(axis=1) / w
    grand = (w * means).sum() / W
    between = (w * (means - grand) ** 2).sum() / W
    within = (t * (L[None, :] - means[:, None]) ** 2).sum() / W
    return float(between), float(within)


def grayscale_order(ctx: CheckContext) -> list[RuleResult]:
    """Sequential themes: Spearman rho of data value vs the composite's L* over the theme's
    pixels >= 0.95 -- the map still orders its values when printed in grey. The sign is taken
    in the ramp's own direction (a ramp that darkens with the value counts rho < 0 as order)."""
    RHO_LIMIT = float(limit_of("grayscale-order", ctx.budgets)[0])  # noqa: N806
    out = []
    for spec, s in ctx.layers("theme", ("field",)):
        ramp = ctx.ramp_of(spec)
        if ramp is None or ramp.kind not in SEQUENTIAL_KINDS:
            continue
        lut = ctx.lut(ramp)
        direction = 1.0 if lut.lab[lut.n - 1, 0] >= lut.lab[0, 0] else -1.0
        rho = s.grayscale_rho() * direction
        if isinstance(rho, float) and math.isnan(rho):
            out.append(RuleResult("grayscale-order", spec.name, None, RHO_LIMIT, True,
                                  "fewer than two values or lightnesses drawn: not measurable",
                                  ramp=ramp.name))
            continue
        passed = rho >= RHO_LIMIT
        fix, change = "", None
        if not passed:
            between, within = _spread(s.value_lightness, s.values)
            need = RHO_LIMIT ** 2 / (1 - RHO_LIMIT ** 2)
            k = math.sqrt(need * within / between) if between > 0 else float("inf")
            sd = math.sqrt(within)
            if rho < 0 or k <= 1:
                fix = (f'composite L* does not rise or fall with the values; check the L* of ramp '
                       f'"{ramp.name}" and the blend of the layers drawn over it')
            else:
                fix = (f'other layers vary the composite L* by +-{sd:.1f} at a value: widen the L* '
                       f'range of ramp "{ramp.name}" by >= {k:.2f}x, or cut that variation to '
                       f"<= +-{sd / k:.1f} (e.g. a lower relief strength)")
                relief = next((g for g, _ in ctx.layers("ground", ("relief",))), None)
                if not _metrics(ctx, ramp).lightness_monotone:
                    # no relief setting can order a ramp whose own lightness turns back
                    text, change = _shape_change("ramp-lightness-monotone", ramp,
                                                 float(ctx.budgets.ramp.evenness),
                                                 memo=ctx._memo)
                    fix = (f'ramp "{ramp.name}" itself does not order its values by lightness; '
                           + text) if change is not None else fix
                elif relief is not None:
                    # the relief's L* variation scales about linearly with its strength
                    new = math.floor(relief.options.strength / k * 0.9 * 100) / 100
                    fix += f"; e.g. {relief.name} strength {relief.options.strength:g} -> {new:g}"
                    change = Change(f'layer "{relief.name}"', {"strength": new})
        out.append(RuleResult("grayscale-order", spec.name, rho, RHO_LIMIT, passed,
                              f"Spearman rho(value, composite L*) {rho:.3f} in the ramp's "
                              f"direction (L* {'rises' if direction > 0 else 'falls'} with the "
                              f"value); at least {RHO_LIMIT:g}",
                              fix, ramp=ramp.name, change=change))
    return out


# --- ramp shape (from compose.ramps.rule_checks) ---------------------------------------------

def _from_checks(ctx: CheckContext, rule: str, source: str, severity: str = "failure",
                 kinds=None) -> list[RuleResult]:
    from compose.ramps import RampLimits, rule_checks
    out = []
    for r in ctx.used_ramps():
        if kinds is not None and r.kind not in kinds:
            continue
        for c in rule_checks(_metrics(ctx, r), RampLimits.from_budgets(ctx.budgets)):
            if c.rule != source:
                continue
            met = bool(c.passed)
            passed = met or severity == WARNING
            fix, change = ("", None) if met else _shape_change(
                rule, r, float(ctx.budgets.ramp.evenness) if ctx.budgets is not None else 10.0,
                memo=ctx._memo)
            out.append(_result(ctx, rule, r, c.value, c.limit, passed, c.message,
                               fix or ("" if met else _shape_fix(rule, r)), severity=severity,
                               met=met, change=change))
    return out


def _shape_change(rule: str, ramp, limit: float = 10.0,
                  memo: dict | None = None) -> tuple[str, Change | None]:
    """A structured change for the shape rules of a sequential ramp written with ``through``
    stops: lightness re-spaced evenly from the lightest to the darkest stop (in the direction the
    ramp runs), each stop's own hue kept, its chroma kept -- or, when the stops' hues turn back
    so that evenness (``limit``, CV %) still fails, lowered by one common factor
    (:func:`compose.ramps.respace.respace_stops`)."""
    if rule not in ("ramp-lightness-monotone", "ramp-step-uniformity") or ramp.kind != "sequential":
        return "", None
    if len(ramp.stops) < 2:
        return "", None
    from compose.ramps.respace import respace_stops
    # the same ramp and limit re-spaced once per check (several rules ask: a pure function)
    key = ("respace", id(ramp), float(limit))
    got = memo.get(key) if memo is not None else None
    if got is None:
        got = respace_stops(ramp.stops, ramp.space, ramp.domain, limit, ramp.values)
        if memo is not None:
            memo[key] = got
    # written in the file's own order: a ramp with ``reverse = true``, a domain from high to low
    # or pinned values listed from high to low is built from its stops in the opposite order
    listing = got.stops[::-1] if ramp.listed_reversed else got.stops
    through = [{"L": L, "C": C, "h": h} for L, C, h in listing]
    listed = ", ".join(f"{{L = {t['L']:g}, C = {t['C']:g}, h = {t['h']:g}}}" for t in through)
    first, last = got.stops[0][0], got.stops[-1][0]
    chroma = ("each stop's chroma kept" if got.chroma_factor >= 1.0 else
              f"chroma lowered to {got.chroma_factor:.0%} of each stop's, as the hues turn back "
              "and stronger colours would make far values look alike")
    text = (f'respace ramp "{ramp.name}": L* {"falling" if got.falling else "rising"} evenly '
            f"{first:.0f} -> {last:.0f}, each stop's own hue kept, {chroma}: "
            f"through = [{listed}]")
    return text, Change(ramp_key(ramp.name), {"through": through})


def _shape_fix(rule: str, ramp) -> str:
    return {
        "ramp-lightness-monotone": "give the stops strictly increasing (or decreasing) L*",
        "ramp-step-uniformity": "space the stops more evenly in lightness and chroma",
        "ramp-diverging-symmetry": "give stops at equal distance from the midpoint equal L*",
        "ramp-neutral-midpoint": "lower the midpoint stop to C* <= 5",
        "ramp-break-visible": "turn the hue of the 'above' stops further from the 'below' stops",
    }.get(rule, "")


def ramp_lightness_monotone(ctx: CheckContext) -> list[RuleResult]:
    """L* monotone along sequential / twin / threshold ramps and along each diverging arm."""
    return _from_checks(ctx, "ramp-lightness-monotone", "ramp-lightness-monotone")


def ramp_step_uniformity(ctx: CheckContext) -> list[RuleResult]:
    """Even perceived steps: CV of CAM02-UCS steps <= 5 % (sequential and twin ramps)."""
    return _from_checks(ctx, "ramp-step-uniformity", "ramp-step-uniformity")


def ramp_diverging_symmetry(ctx: CheckContext) -> list[RuleResult]:
    """Diverging ramps: |dL*| <= 1 at equal distance from the centre."""
    return _from_checks(ctx, "ramp-diverging-symmetry", "ramp-diverging-symmetry")


def ramp_neutral_midpoint(ctx: CheckContext) -> list[RuleResult]:
    """Diverging ramps: midpoint C* <= 5; a coloured midpoint is a *warning* (it may be meant)."""
    return _from_checks(ctx, "ramp-neutral-midpoint", "ramp-neutral-midpoint", severity=WARNING)


def ramp_break_visible(ctx: CheckContext) -> list[RuleResult]:
    """Threshold ramps: the break shows, dE00 >= 10 across it (Brychtova & Coltekin 2016)."""
    return _from_checks(ctx, "ramp-break-visible", "ramp-break-visible")
