"""Rules about the ramps the layers draw: twins, threshold breaks, no-data colours, classes
(normal vision and deutan / protan simulation), grayscale order of the composite, ramp shape.

Ramp measurements come from :func:`compose.ramps.ramp_metrics` (8-bit sampled colours); the
class, no-data and grayscale rules use the style's budgets and the render's statistics.
CVD: Machado, Oliveira & Fernandes (2009) matrices at severity 100, in linear RGB.
"""
from __future__ import annotations

import math

import numpy as np

from compose.check.context import SEQUENTIAL_KINDS, CheckContext, ramp_key
from compose.check.fixes import hex8, solve_class_pair, solve_nodata
from compose.check.report import WARNING, Change, RuleResult
from compose.check.stats import N_LIGHTNESS
from compose.color.cvd import simulate_cvd
from compose.color.difference import delta_e_2000
from compose.color.lab import srgb_to_lab, srgb_to_lch
from compose.color.parse import to_rgb8

__all__ = ["TWIN_HUE_GAP", "FAMILY_FACTOR", "RHO_LIMIT", "twin_lightness", "twin_chroma",
           "twin_hue", "threshold_lightness", "nodata_chroma", "nodata_separation",
           "nodata_background", "classes_count", "classes_separation", "classes_separation_deutan",
           "classes_separation_protan", "grayscale_order", "ramp_lightness_monotone",
           "ramp_step_uniformity", "ramp_diverging_symmetry", "ramp_neutral_midpoint",
           "ramp_break_visible"]

TWIN_HUE_GAP = 30.0   # degrees between twins at equal values (our design target, no source)
FAMILY_FACTOR = 0.5   # classes of one family may sit at half the separation (our choice, no source)
RHO_LIMIT = 0.95      # Spearman rho of value vs composite L* (our design target, no source)
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
    return [r for r in ctx.used_ramps() if r.kind == "twin" and r.base is not None]


def twin_lightness(ctx: CheckContext) -> list[RuleResult]:
    """|dL*| <= 1 between a twin and its base at equal positions (8-bit colours)."""
    out = []
    for r in _twins(ctx):
        v = _metrics(ctx, r).twin_dl_max
        out.append(_result(ctx, "twin-lightness", r, v, 1.0, v <= 1.0,
                           f'largest |dL*| against "{r.base.name}" {v:.2f}; limit 1',
                           "" if v <= 1.0 else f'lower the chroma of "{r.base.name}" stops so both '
                           "hues can show it"))
    return out


def twin_chroma(ctx: CheckContext) -> list[RuleResult]:
    """|dC*| <= 1 between a twin and its base at equal positions (8-bit colours)."""
    out = []
    for r in _twins(ctx):
        v = _metrics(ctx, r).twin_dc_max
        out.append(_result(ctx, "twin-chroma", r, v, 1.0, v <= 1.0,
                           f'largest |dC*| against "{r.base.name}" {v:.2f}; limit 1',
                           "" if v <= 1.0 else f'lower the chroma of "{r.base.name}" stops so both '
                           "hues can show it"))
    return out


def _hue_gap(a, b):
    return np.abs((np.asarray(b) - np.asarray(a) + 180.0) % 360.0 - 180.0)


def twin_hue(ctx: CheckContext) -> list[RuleResult]:
    """Twin hues >= 30 degrees from the base's at every position where both show a hue
    (C* >= 5; below that a hue is hardly seen)."""
    out = []
    t = np.linspace(0.0, 1.0, 257)
    for r in _twins(ctx):
        mine = srgb_to_lch(to_rgb8(r.colors_at(t, fraction=True)) / 255.0)
        theirs = srgb_to_lch(to_rgb8(r.base.colors_at(t, fraction=True)) / 255.0)
        seen = (mine[:, 1] >= 5) & (theirs[:, 1] >= 5)
        if not seen.any():
            out.append(_result(ctx, "twin-hue", r, None, TWIN_HUE_GAP, True,
                               "both ramps are nearly grey (C* < 5): no hue to compare"))
            continue
        gap = float(_hue_gap(mine[seen, 2], theirs[seen, 2]).min())
        passed = gap >= TWIN_HUE_GAP
        fix, change = "", None
        if not passed and r.hue is not None:
            planned = r.hue[0] + t * (r.hue[1] - r.hue[0])
            for d in sorted(range(-180, 181), key=abs):
                if _hue_gap(planned[seen] + d, theirs[seen, 2]).min() >= TWIN_HUE_GAP + 1:
                    new = [round(r.hue[0] + d, 1), round(r.hue[1] + d, 1)]
                    fix = f'turn the hue of "{r.name}" by {d:+d} degrees: hue = {new}'
                    change = Change(ramp_key(r.name), {"hue": new})
                    break
        out.append(_result(ctx, "twin-hue", r, gap, TWIN_HUE_GAP, passed,
                           f'smallest hue difference from "{r.base.name}" {gap:.1f} deg '
                           f"(where both C* >= 5); at least {TWIN_HUE_GAP:g}", fix, change=change))
    return out


# --- threshold ----------------------------------------------------------------------------

def threshold_lightness(ctx: CheckContext) -> list[RuleResult]:
    """|dL*| <= 1 across the break of threshold ramps drawn by theme layers (8-bit colours of
    the lookup-table entries on either side)."""
    out = []
    for r in ctx.used_ramps("theme"):
        if r.kind != "threshold":
            continue
        m = _metrics(ctx, r)
        passed = m.break_dl <= 1.0
        fix, change = "", None
        if not passed and r.n_below and len(r.stops) > r.n_below:
            last_below, first_above = r.stops[r.n_below - 1], r.stops[r.n_below]
            new = {"L": round(last_below[0], 1), "C": first_above[1], "h": first_above[2]}
            fix = (f"give the first 'above' stop the L* of the last 'below' stop: "
                   f"{{L = {new['L']:g}, C = {new['C']:g}, h = {new['h']:g}}}")
            change = Change(ramp_key(r.name) + ".above[0]", new)
        out.append(_result(ctx, "threshold-lightness", r, m.break_dl, 1.0, passed,
                           f"|dL*| across the break at {r.at:g}: {m.break_dl:.2f}; limit 1 "
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


def _nodata_fix(ctx, ramp, rgb8, table, key) -> tuple[str, Change | None]:
    nb = ctx.budgets.nodata
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
        fix, change = ("", None) if passed else _nodata_fix(ctx, ramp, rgb8, table, key)
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
        fix, change = ("", None) if passed else _nodata_fix(ctx, ramp, rgb8, table, key)
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
        fix, change = ("", None) if passed else _nodata_fix(ctx, ramp, rgb8, table, key)
        out.append(RuleResult("nodata-background", spec.name, d, limit, passed,
                              f'no-data "{hex8(rgb8)}" is {why}', fix, ramp=ramp.name, change=change))
    return out


# --- classes ------------------------------------------------------------------------------

def _class_layers(ctx: CheckContext):
    for spec, s in ctx.layers(None, ("classes",)):
        ramp = ctx.ramp_of(spec)
        if ramp is not None and ramp.kind == "qualitative" and len(ramp.classes) >= 1:
            yield spec, s, ramp


def classes_count(ctx: CheckContext) -> list[RuleResult]:
    """Class count inside ``budget.classes.count`` (default 5-9); a *warning* outside (common
    practice: seven plus or minus two)."""
    lo, hi = (int(v) for v in ctx.budgets.classes.count)
    out = []
    for spec, s, ramp in _class_layers(ctx):
        n = len(ramp.classes)
        met = lo <= n <= hi
        out.append(RuleResult("classes-count", spec.name, n, [lo, hi], True,
                              f"{n} classes; common practice {lo} to {hi}",
                              "" if met else (f"merge classes down to {hi}" if n > hi else
                                              "fewer classes than usual; fine if intended"),
                              severity=WARNING, ramp=ramp.name, met=met))
    return out


_VISION_KINDS = ("normal", "deutan", "protan")


def _labs_of(rgb8: np.ndarray) -> np.ndarray:
    """CIELAB (3, k, 3) of 8-bit colours (k, 3) in normal vision, deutan and protan (100)."""
    rgb = np.asarray(rgb8, dtype=float) / 255.0
    return np.stack([srgb_to_lab(rgb)] + [srgb_to_lab(simulate_cvd(rgb, k, 100.0))
                                          for k in _VISION_KINDS[1:]])


def _limits(ramp, separation: float) -> np.ndarray:
    fam = [c.family for c in ramp.classes]
    n = len(fam)
    lim = np.full((n, n), separation)
    for i in range(n):
        for j in range(n):
            if i != j and fam[i] is not None and fam[i] == fam[j]:
                lim[i, j] = separation * FAMILY_FACTOR
    return lim


def _separation(ctx: CheckContext, vision: str) -> list[RuleResult]:
    rule = "classes-separation" + ("" if vision == "normal" else f"-{vision}")
    sep = float(ctx.budgets.classes.separation)
    out = []
    vi = _VISION_KINDS.index(vision)
    for spec, s, ramp in _class_layers(ctx):
        rgb8 = to_rgb8(np.array([c.rgb for c in ramp.classes]))
        if len(rgb8) < 2:
            continue
        lab = _labs_of(rgb8)[vi]
        d = delta_e_2000(lab[:, None, :], lab[None, :, :])
        lim = _limits(ramp, sep)
        ratio = np.where(np.eye(len(rgb8), dtype=bool), np.inf, d / np.maximum(lim, 1e-9))
        i, j = np.unravel_index(np.argmin(ratio), ratio.shape)
        i, j = int(min(i, j)), int(max(i, j))
        value, limit = float(d[i, j]), float(lim[i, j])
        passed = bool(value >= limit)
        a, b = ramp.classes[i].label, ramp.classes[j].label
        fam = " (same family: half the separation)" if limit < sep else ""
        msg = (f'closest pair "{a}" / "{b}" {value:.1f} dE00 in {vision} vision; at least '
               f"{limit:g}{fam}")
        fix, change = "", None
        if not passed:
            sol = solve_class_pair(rgb8, (i, j), lim, _labs_of)
            if sol is None:
                fix = f'change the hue or lightness of "{a}" or "{b}"'
            else:
                k, new = sol
                L0 = float(srgb_to_lch(rgb8[k] / 255.0)[0])
                L1 = float(srgb_to_lch(new / 255.0)[0])
                fix = (f'move "{ramp.classes[k].label}" from L* {L0:.1f} to {L1:.1f}: color = '
                       f'"{hex8(new)}" (clears every pair in normal, deutan and protan vision)')
                change = Change(f"{ramp_key(ramp.name)}.classes[{k}]", {"color": hex8(new)})
        out.append(RuleResult(rule, spec.name, value, limit, passed, msg, fix, ramp=ramp.name,
                              change=change))
    return out


def classes_separation(ctx: CheckContext) -> list[RuleResult]:
    """Smallest pairwise dE00 of the class colours >= ``budget.classes.separation`` (default 10,
    Brychtova & Coltekin 2016); pairs of one ``family`` need half of it (deliberate closeness)."""
    return _separation(ctx, "normal")


def classes_separation_deutan(ctx: CheckContext) -> list[RuleResult]:
    """The same under deutan simulation (Machado et al. 2009, severity 100)."""
    return _separation(ctx, "deutan")


def classes_separation_protan(ctx: CheckContext) -> list[RuleResult]:
    """The same under protan simulation (Machado et al. 2009, severity 100)."""
    return _separation(ctx, "protan")


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
        fix = ""
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
        out.append(RuleResult("grayscale-order", spec.name, rho, RHO_LIMIT, passed,
                              f"Spearman rho(value, composite L*) {rho:.3f} in the ramp's "
                              f"direction (L* {'rises' if direction > 0 else 'falls'} with the "
                              f"value); at least {RHO_LIMIT:g}",
                              fix, ramp=ramp.name))
    return out


# --- ramp shape (from compose.ramps.rule_checks) ---------------------------------------------

def _from_checks(ctx: CheckContext, rule: str, source: str, severity: str = "failure",
                 kinds=None) -> list[RuleResult]:
    from compose.ramps import rule_checks
    out = []
    for r in ctx.used_ramps():
        if kinds is not None and r.kind not in kinds:
            continue
        for c in rule_checks(_metrics(ctx, r)):
            if c.rule != source:
                continue
            met = bool(c.passed)
            passed = met or severity == WARNING
            out.append(_result(ctx, rule, r, c.value, c.limit, passed, c.message,
                               "" if met else _shape_fix(rule, r), severity=severity, met=met))
    return out


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
    return _from_checks(ctx, "ramp-lightness-monotone", "ramp.lightness-monotone")


def ramp_step_uniformity(ctx: CheckContext) -> list[RuleResult]:
    """Even perceived steps: CV of CAM02-UCS steps <= 5 % (sequential and twin ramps)."""
    return _from_checks(ctx, "ramp-step-uniformity", "ramp.step-uniformity")


def ramp_diverging_symmetry(ctx: CheckContext) -> list[RuleResult]:
    """Diverging ramps: |dL*| <= 1 at equal distance from the centre."""
    return _from_checks(ctx, "ramp-diverging-symmetry", "ramp.diverging-symmetry")


def ramp_neutral_midpoint(ctx: CheckContext) -> list[RuleResult]:
    """Diverging ramps: midpoint C* <= 5; a coloured midpoint is a *warning* (it may be meant)."""
    return _from_checks(ctx, "ramp-neutral-midpoint", "ramp.neutral-midpoint", severity=WARNING)


def ramp_break_visible(ctx: CheckContext) -> list[RuleResult]:
    """Threshold ramps: the break shows, dE00 >= 10 across it (Brychtova & Coltekin 2016)."""
    return _from_checks(ctx, "ramp-break-visible", "ramp.break-visible")
