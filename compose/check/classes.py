"""Class rules of qualitative (``classes``) layers: count (a warning, common practice) and
smallest pairwise CIEDE2000 in normal vision and under deutan and protan simulation (Machado,
Oliveira & Fernandes 2009, severity 100, linear RGB). Brychtova & Coltekin (2016) recommend
dE00 = 10 for map colours compared across a gap. Classes of one ``family`` are meant to look
related, so a pair inside a family needs only ``FAMILY_FACTOR`` (half) of the separation (our
choice, no source).
"""
from __future__ import annotations

import numpy as np

from compose.check.context import CheckContext, ramp_key
from compose.check.fixes import hex8, solve_class_pair
from compose.check.report import WARNING, Change, RuleResult
from compose.color.cvd import simulate_cvd
from compose.color.difference import delta_e_2000
from compose.color.lab import srgb_to_lab, srgb_to_lch
from compose.color.parse import to_rgb8

__all__ = ["FAMILY_FACTOR", "classes_count", "classes_separation", "classes_separation_deutan",
           "classes_separation_protan"]

FAMILY_FACTOR = 0.5   # classes of one family may sit at half the separation (our choice, no source)


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
    for spec, _s, ramp in _class_layers(ctx):
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


def _as_seen(s, rgb8: np.ndarray) -> tuple[np.ndarray, bool]:
    """The class colours as the reader sees them: each class's mean composite colour where the
    map draws it (from the render's histograms), its palette colour where it draws none."""
    got = s.composite_colors(min_pixels=4.0)
    if got is None:
        return rgb8, False
    rgb, _ = got
    k = len(rgb8)
    seen = rgb8.astype(float).copy()
    drawn = np.isfinite(rgb[:k]).all(axis=1)
    seen[drawn] = np.rint(rgb[:k][drawn] * 255)
    return np.clip(seen, 0, 255).astype(np.uint8), bool(drawn.any())


def _separation(ctx: CheckContext, vision: str) -> list[RuleResult]:
    rule = "classes-separation" + ("" if vision == "normal" else f"-{vision}")
    sep = float(ctx.budgets.classes.separation)
    out = []
    vi = _VISION_KINDS.index(vision)
    for spec, s, ramp in _class_layers(ctx):
        rgb8 = to_rgb8(np.array([c.rgb for c in ramp.classes]))
        if len(rgb8) < 2:
            continue
        seen, on_map = _as_seen(s, rgb8)
        lab = _labs_of(seen)[vi]
        d = delta_e_2000(lab[:, None, :], lab[None, :, :])
        lim = _limits(ramp, sep)
        ratio = np.where(np.eye(len(rgb8), dtype=bool), np.inf, d / np.maximum(lim, 1e-9))
        i, j = np.unravel_index(np.argmin(ratio), ratio.shape)
        i, j = int(min(i, j)), int(max(i, j))
        value, limit = float(d[i, j]), float(lim[i, j])
        passed = bool(value >= limit)
        a, b = ramp.classes[i].label, ramp.classes[j].label
        fam = " (same family: half the separation)" if limit < sep else ""
        where = ("as drawn on the map (mean colour after the layers blended with it)" if on_map
                 else "of the palette (no pixels drawn)")
        msg = (f'closest pair "{a}" / "{b}" {value:.1f} dE00 in {vision} vision, {where}; at '
               f"least {limit:g}{fam}")
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


