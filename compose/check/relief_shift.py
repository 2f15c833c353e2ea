"""How far the relief shifts a theme's lightness: a shaded light class must not read as an
unshaded darker class (rule ``relief-shift``).

Measured per theme layer from the composite L* histogram of each palette entry (the render's
merged window histograms, :attr:`LayerStats.value_lightness`; L* bins of 1):

* positions along the ramp: each class of a qualitative or stepped ramp, or :data:`FINE` equal
  runs of the lookup table of a continuous ramp, whose *classes* are :data:`BANDS` equal parts of
  its domain (readers tell about five to seven steps of one ramp apart; common practice, no
  source);
* a position's *unshaded* lightness is its lit end, the L* p90 of its pixels (flat or sunlit
  ground under a darkening relief);
* a position can be mistaken for a darker one by lightness when the two colours, given the same
  L*, are less than :data:`CHROMATIC_NEAR` dE00 apart (Brychtova & Coltekin 2016: 10 dE00 tells
  map colours apart) and lie on the same arm of a diverging ramp; along a continuous ramp the
  one compared is one class (a fifth of the domain) away;
* the *overlap* of a class is the share of its pixels drawn at or below the unshaded L* of such a
  darker neighbour: pixels the relief has shaded into reading as the darker class.

The value is the largest overlap; the limit ``budget.theme.relief_overlap`` (default 0.10 -- a
tenth of a class may sit on slopes steep and shaded enough to look one class darker; common
practice, no source). The fix lowers the relief's ``strength``: the relief's L* departure from
its tint is proportional to it (:func:`compose.ramps.relief.relief_colors`), and the composite's
departure from a class's lit end follows it about proportionally, so the overlap is re-estimated
with every pixel's departure scaled by the strength ratio (and the strength found is lowered by a
further 10 %, for the 1-L* bins the estimate cannot resolve).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from compose.check.catalog import limit_of
from compose.check.context import CheckContext, layer_key
from compose.check.fixes import relief_stats
from compose.check.report import Change, RuleResult
from compose.check.stats import N_LIGHTNESS
from compose.color.difference import delta_e_2000
from compose.color.lab import srgb_to_lab

__all__ = ["BANDS", "FINE", "CHROMATIC_NEAR", "LIT_SHARE", "relief_shift", "shift_overlaps"]

BANDS = 5          # classes of a continuous ramp (common practice, no source)
FINE = 64          # positions along a continuous ramp the lightness is measured at (our choice)
CHROMATIC_NEAR = 10.0   # dE00 at equal L* below which two classes differ by lightness only
                        # (Brychtova & Coltekin 2016: dE00 10 tells map colours apart)
LIT_SHARE = 0.9    # a class's unshaded lightness: its composite L* p90 (our choice, no source)
MIN_PIXELS = 8.0   # sampled pixels a position needs to be judged (our choice)
_L = np.arange(N_LIGHTNESS, dtype=float)


def _lit(hist: np.ndarray) -> np.ndarray:
    tot = hist.sum(axis=1)
    cdf = np.cumsum(hist, axis=1) / np.maximum(tot, 1e-12)[:, None]
    lit = np.minimum((cdf < LIT_SHARE - 1e-9).sum(axis=1), N_LIGHTNESS - 1).astype(float)
    lit[tot < MIN_PIXELS] = np.nan
    return lit


def _chromatic_gap(rgb_a: np.ndarray, rgb_b: np.ndarray) -> np.ndarray:
    """dE00 between colours (k, 3) (sRGB floats) once both are given the same L* (their mean):
    how far hue and chroma alone tell them apart."""
    la, lb = srgb_to_lab(rgb_a), srgb_to_lab(rgb_b)
    mid = (la[..., 0] + lb[..., 0]) / 2
    la[..., 0] = mid
    lb[..., 0] = mid
    return delta_e_2000(la, lb)


@dataclass
class _Classes:
    """Positions measured along a theme's ramp and the class each belongs to."""

    groups: np.ndarray           # (n_entries,) position of each palette entry, -1 = none
    n: int                       # positions
    band: np.ndarray             # (n,) class of each position
    names: list[str]             # class names
    rgb: np.ndarray              # (n, 3) palette colour of each position (sRGB floats)
    side: np.ndarray             # (n,) arm of a diverging ramp (-1 / 1), 0 otherwise
    step: int                    # positions between a position and the next class (1: classes)
    by_hue: bool = False         # compare only colours close in hue and chroma


def _classes(ramp, lut, n_entries: int) -> _Classes:
    n = lut.n
    rgb_all = lut.rgb8[:n] / 255.0
    if ramp.kind == "qualitative" or ramp.stepped:
        groups = np.full(n_entries, -1, dtype=int)
        groups[:n] = np.arange(n)
        names = ([c.label for c in ramp.classes][:n] if ramp.kind == "qualitative"
                 else [f"step {i + 1}" for i in range(n)])
        side = np.zeros(n, dtype=int)
        if ramp.kind == "diverging" and ramp.center is not None:
            side = np.where(np.asarray(lut.values[:n]) < ramp.center, -1, 1)
        cls = _Classes(groups, n, np.arange(n), names, rgb_all, side, 1,
                       by_hue=ramp.kind in ("qualitative", "threshold"))
        if ramp.kind != "qualitative":          # steps of one ramp: only neighbours
            cls.step = -1
        return cls
    lo, hi = (float(v) for v in ramp.domain)
    span = (hi - lo) if hi != lo else 1.0
    fine = min(FINE, n)
    groups = np.full(n_entries, -1, dtype=int)
    groups[:n] = np.minimum(np.arange(n) * fine // n, fine - 1)
    centre_v = lo + (np.arange(fine) + 0.5) / fine * span
    band = np.clip(((centre_v - lo) / span * BANDS).astype(int), 0, BANDS - 1)
    edges = [lo + span * k / BANDS for k in range(BANDS + 1)]
    names = [f"{edges[k]:.3g}..{edges[k + 1]:.3g}" for k in range(BANDS)]
    mid_idx = np.minimum((np.arange(fine) + 0.5) * n / fine, n - 1).astype(int)
    side = np.zeros(fine, dtype=int)
    if ramp.kind == "diverging" and ramp.center is not None:
        side = np.where(centre_v < float(ramp.center), -1, 1)
    return _Classes(groups, fine, band, names, rgb_all[mid_idx], side,
                    max(1, int(round(fine / BANDS))), by_hue=ramp.kind == "threshold")


def _pairs(c: _Classes, lit: np.ndarray) -> list[tuple[int, int]]:
    """(position, the position one class darker that it can be mistaken for by lightness)."""
    out: list[tuple[int, int]] = []
    if c.step == 1:                          # qualitative classes: every pair of near colours
        cand = [(i, j) for i in range(c.n) for j in range(c.n) if i != j]
    else:                                    # along a ramp: one class away, either way
        d0 = max(c.step, 1)
        cand = [(i, i + d) for i in range(c.n) for d in (-d0, d0) if 0 <= i + d < c.n]
    if not cand:
        return out
    a = np.array([p[0] for p in cand])
    b = np.array([p[1] for p in cand])
    # along one ordered ramp neighbours are read by lightness; across a threshold's break and
    # between qualitative classes only colours close in hue and chroma are
    near = (_chromatic_gap(c.rgb[a], c.rgb[b]) < CHROMATIC_NEAR if c.by_hue
            else np.ones(a.size, dtype=bool))
    same_arm = c.side[a] == c.side[b]
    darker = lit[b] < lit[a]
    keep = near & same_arm & darker & np.isfinite(lit[a]) & np.isfinite(lit[b])
    return [(int(i), int(j)) for i, j in zip(a[keep], b[keep])]


def shift_overlaps(hist: np.ndarray, c: _Classes, scale: float = 1.0
                   ) -> list[tuple[float, int, int]]:
    """(share of a class's pixels the relief shades to or below the unshaded L* of a darker
    class it can be mistaken for, the class, that darker class) for every class with such a
    neighbour. ``scale`` multiplies every pixel's departure from its position's lit end (the
    relief at ``scale`` times its strength)."""
    lit = _lit(hist)
    if c.step != 1:
        # along a ramp lightness runs smoothly: a position without pixels between two with
        # pixels takes the lit end between theirs (sparse data on a coarse grid still compares)
        have = np.nonzero(np.isfinite(lit))[0]
        if have.size >= 2:
            inside = (np.arange(c.n) > have[0]) & (np.arange(c.n) < have[-1])
            lit = np.where(np.isfinite(lit) | ~inside, lit,
                           np.interp(np.arange(c.n), have, lit[have]))
    tot = hist.sum(axis=1)
    over = np.zeros(c.n)
    other = np.full(c.n, -1)
    for i, j in _pairs(c, lit):
        if tot[i] < MIN_PIXELS:
            continue
        L = lit[i] + (_L - lit[i]) * scale
        share_px = float(hist[i][L <= lit[j] + 1e-9].sum())
        if share_px >= over[i]:
            over[i], other[i] = share_px, j
    out = []
    for k in range(len(c.names)):
        members = np.nonzero((c.band == k) & (other >= 0))[0]
        total = float(tot[c.band == k].sum())
        if members.size == 0 or total <= 0:
            continue
        share = float(over[members].sum()) / total
        j = int(other[members[np.argmax(over[members])]])
        out.append((share, k, int(c.band[j])))
    return out


def _class_hist(s, c: _Classes) -> np.ndarray:
    hist = np.zeros((c.n, N_LIGHTNESS))
    keep = c.groups >= 0
    np.add.at(hist, c.groups[keep], np.asarray(s.value_lightness, dtype=float)[keep])
    return hist


def _relief_layer(ctx: CheckContext):
    for spec, s in ctx.layers(None, ("relief",)):
        return spec, s
    return None


def _fix(ctx: CheckContext, theme, hist, c: _Classes, limit: float) -> tuple[str, Change | None]:
    got = _relief_layer(ctx)
    if got is None:
        return ("a layer drawn over the data darkens one class into the next: lighten it or draw "
                "it lower"), None
    spec, s = got
    s0 = float(spec.options.strength)
    best = None
    for st in np.round(np.arange(s0 - 0.01, -1e-9, -0.01), 2):
        worst = max((o for o, _, _ in shift_overlaps(hist, c, float(st) / s0)), default=0.0)
        if worst <= limit * 0.8:
            best = float(st)
            break
    if best is None or s0 <= 0:
        return "even without shading the classes overlap: widen the L* steps between them", None
    scale = best / s0
    # the overlap jumps as whole 1-L* bins cross a class's lit end, which the proportional
    # estimate places only roughly: 10 % lower still (tests/check/test_fix_fuzz.py applies it)
    best = math.floor(best * 0.9 * 100) / 100
    text = (f"lower the {spec.name} strength from {s0:g} to {best:g} (the shading moves each "
            f"class's lightness proportionally less)")
    change = Change(layer_key(spec.name), {"strength": best})
    weights = s.parts["shade"].weights if "shade" in s.parts else None
    need = float(limit_of("relief-visible", ctx.budgets)[0])
    if weights is not None and spec.role == "ground":
        p5, p95, _ = relief_stats(spec.options, weights, strength=best)
        if p95 - p5 < need and _drawn_below(ctx, spec.name, theme.name):
            # that strength would leave the relief unseen (rule relief-visible): keep the relief
            # and let less of it through the theme instead. Drawn normally at opacity a, the
            # theme passes (1 - a) of the relief's departure, multiplied about all of it. The
            # estimate is kept conservative (1 - a <= 0.4 x the strength ratio), as the relief
            # then also tints the data and draws the classes closer; 0.85 to 0.95 keeps a hint
            # of relief under the data colours (common practice, no source)
            a = math.ceil((1.0 - 0.4 * scale) * 20) / 20
            a = min(max(a, 0.85), 0.95)
            text = (f'draw "{theme.name}" over the {spec.name} with blend = "normal", opacity = '
                    f"{a:g}: a hint of the relief still shows through, but shaded classes keep "
                    f"their lightness (lowering the {spec.name} strength to {best:g} instead "
                    f"would leave its own L* spread at {p95 - p5:.1f} < {need:g}, rule "
                    "relief-visible)")
            change = Change(layer_key(theme.name), {"blend": "normal", "opacity": a})
    if spec.blend == "multiply" and _drawn_below(ctx, theme.name, spec.name):
        # a shaded overprint above the data: a gentler blend also shades it less
        text += f'; or draw {spec.name} with a gentler blend (blend = "soft_light")'
    return text, change


def _drawn_below(ctx: CheckContext, lower: str, upper: str) -> bool:
    names = [s.name for s in ctx.stats.layers]
    return lower in names and upper in names and names.index(lower) < names.index(upper)


def relief_shift(ctx: CheckContext) -> list[RuleResult]:
    """Largest share of a theme class's pixels that the relief shades into reading as a darker
    class <= ``budget.theme.relief_overlap`` (default 0.10; common practice, no source)."""
    if _relief_layer(ctx) is None:
        return []
    limit = float(limit_of("relief-shift", ctx.budgets)[0])
    out = []
    for spec, s in ctx.layers("theme", ("field", "classes")):
        ramp = ctx.ramp_of(spec)
        if ramp is None or s.value_lightness is None:
            continue
        if ramp.kind != "qualitative" and not ctx.metrics(ramp).lightness_monotone:
            out.append(RuleResult("relief-shift", spec.name, None, limit, True,
                                  f'ramp "{ramp.name}" does not order its values by lightness '
                                  "(rule ramp-lightness-monotone): no darker neighbour to judge "
                                  "against until it does", ramp=ramp.name))
            continue
        c = _classes(ramp, ctx.lut(ramp), s.value_lightness.shape[0])
        hist = _class_hist(s, c)
        found = shift_overlaps(hist, c)
        if not found:
            out.append(RuleResult("relief-shift", spec.name, None, limit, True,
                                  "no two classes drawn differ by lightness only; not measured",
                                  ramp=ramp.name))
            continue
        value, k, j = max(found)
        passed = value <= limit
        msg = (f'{value:.1%} of "{c.names[k]}" is shaded to or below the unshaded lightness (L* '
               f'p90) of "{c.names[j]}", a darker class it differs from by lightness only; at '
               f"most {limit:.0%}")
        fix, change = ("", None) if passed else _fix(ctx, spec, hist, c, limit)
        out.append(RuleResult("relief-shift", spec.name, value, limit, passed, msg, fix,
                              ramp=ramp.name, change=change))
    return out
