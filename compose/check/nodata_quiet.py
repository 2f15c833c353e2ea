"""A large no-data area recedes (rule ``nodata-quiet``): no-data is neutral (``nodata-chroma``)
*and* quiet -- it must not draw more attention than the data.

Attention to a flat area on a map comes first from its lightness contrast with the paper (a dark
area on light paper is seen before anything else; common practice, no source). When the drawn
no-data colour covers at least ``budget.nodata.area`` of the canvas (default 0.10; common
practice, no source), its lightness contrast with the paper, |L*(no-data) - L*(paper)|, must not
exceed the data's median contrast, the weighted p50 of |L*(data) - L*(paper)| over the data's
pixels. Both are taken as drawn on the map: the mean composite colour of each palette entry
(the render's merged histograms, :meth:`LayerStats.composite_colors`), where the theme shows
and no later theme covers it. The paper is the map's ``background``.

The fix is the light neutral nearest the paper (same hue, C* within the no-data chroma budget)
that is still >= ``budget.nodata.separation`` dE00 from the paper and from every ramp colour
(Brychtova & Coltekin 2016) and, drawn under the same layers, quiet enough.
"""
from __future__ import annotations

import numpy as np

from compose.check.context import CheckContext, layer_key
from compose.check.fixes import hex8, lch_rgb8, lightness_of_y, luminance8
from compose.check.report import Change, RuleResult
from compose.check.stats import weighted_percentiles
from compose.color.difference import delta_e_2000
from compose.color.lab import srgb_to_lab, srgb_to_lch

__all__ = ["QuietNumbers", "quiet_numbers", "solve_quiet_nodata", "nodata_quiet"]


class QuietNumbers:
    """What the rule measures for one theme: share (0-1 of the canvas) the no-data colour shows
    on; paper L*; no-data L* as drawn; the data's p50 |dL*| from the paper; the ratio of the
    no-data's drawn to palette luminance (how the layers above and below change it)."""

    def __init__(self, share: float, paper_L: float, nodata_L: float, data_contrast: float,
                 y_ratio: float) -> None:
        self.share, self.paper_L, self.nodata_L = share, paper_L, nodata_L
        self.data_contrast, self.y_ratio = data_contrast, y_ratio

    @property
    def contrast(self) -> float:
        return abs(self.nodata_L - self.paper_L)


def _sampled_canvas(ctx: CheckContext) -> float:
    # the blended colours are summed on the rows and columns of the canvas's own grid that are
    # multiples of the grey order's step (compose.check.stats.gray_stride)
    return float(ctx.stats.sampled_pixels)


def quiet_numbers(ctx: CheckContext, s, rgb8: np.ndarray) -> QuietNumbers | None:
    """The rule's numbers for theme statistics ``s`` drawing no-data in ``rgb8``, or None."""
    got = s.composite_colors(min_pixels=1.0)
    nd = s.nodata_index
    if got is None or nd < 0:
        return None
    rgb, n = got
    paper_L = float(srgb_to_lab(np.asarray(ctx.background, dtype=float))[0])
    shown = np.isfinite(rgb).all(axis=1)
    data = shown.copy()
    data[nd] = False
    if not data.any():
        return None
    L = np.full(len(n), np.nan)
    L[shown] = srgb_to_lab(rgb[shown])[:, 0]
    (p50,) = weighted_percentiles(np.abs(L[data] - paper_L), n[data], (50,))
    own_y = float(luminance8(rgb8))
    if shown[nd]:
        drawn_y = float(luminance8(np.rint(rgb[nd] * 255)))
        ratio = drawn_y / own_y if own_y > 0 else 1.0
        nodata_L = float(L[nd])
    else:
        ratio, nodata_L = 1.0, float(srgb_to_lab(rgb8 / 255.0)[0])
    share = float(n[nd]) / max(_sampled_canvas(ctx), 1.0) if shown[nd] else 0.0
    return QuietNumbers(share, paper_L, nodata_L, float(p50), ratio)


def solve_quiet_nodata(ctx: CheckContext, ramp, rgb8, q: QuietNumbers) -> np.ndarray | None:
    """The no-data colour nearest the paper in L* that is neutral, >= the separation from the
    paper and every ramp colour, and drawn no louder than the data (``q``). When none lies within
    twice the separation of the paper's L*, the paper colour itself if it is far enough from the
    ramp (rather than a mid grey); None if nothing works. Solved once per check for the same
    inputs (several rules propose it)."""
    key = ("quiet-nodata", id(ramp), tuple(int(v) for v in np.asarray(rgb8).ravel()), q.share,
           q.paper_L, q.nodata_L, q.data_contrast, q.y_ratio)
    if key not in ctx._memo:
        ctx._memo[key] = _solve_quiet_nodata(ctx, ramp, rgb8, q)
    return ctx._memo[key]


def _solve_quiet_nodata(ctx: CheckContext, ramp, rgb8, q: QuietNumbers) -> np.ndarray | None:
    nb = ctx.budgets.nodata
    _, C, h = srgb_to_lch(np.asarray(rgb8, dtype=float) / 255.0)
    c = min(float(C), max(0.0, float(nb.chroma) - 0.5))
    grid = np.round(np.arange(0.0, 100.0001, 0.5), 1)
    order = grid[np.argsort(np.abs(grid - q.paper_L), kind="stable")]
    cand = lch_rgb8(np.stack([order, np.full_like(order, c), np.full_like(order, h)], axis=-1))
    lab = srgb_to_lab(cand / 255.0)
    ramp_lab = srgb_to_lab(np.unique(ctx.ramp_colors8(ramp), axis=0) / 255.0)
    d_ramp = delta_e_2000(lab[:, None, :], ramp_lab[None, :, :]).min(axis=1)
    d_bg = delta_e_2000(lab, srgb_to_lab(np.asarray(ctx.background, dtype=float)))
    drawn_L = lightness_of_y(np.clip(luminance8(cand) * q.y_ratio, 0.0, 1.0))
    sep = float(nb.separation)
    quiet = ((d_ramp >= sep) & (srgb_to_lch(cand / 255.0)[:, 1] <= float(nb.chroma))
             & (np.abs(drawn_L - q.paper_L) <= q.data_contrast - 1.0))
    good = quiet & (d_bg >= sep)
    near = np.abs(order - q.paper_L) <= 2.0 * sep
    if (good & near).any():              # a light neutral near the paper
        return cand[int(np.argmax(good & near))]
    # farther from the paper a neutral turns into a grey mass: the paper itself (no-data reads
    # as blank map, the nodata-background rule's other choice) is quieter, if it keeps clear of
    # the ramp (our design choice, no source)
    paper = quiet & (d_bg < 0.5)
    if paper.any():
        return cand[int(np.argmax(paper))]
    if not good.any():
        return None
    return cand[int(np.argmax(good))]


def _cases(ctx: CheckContext):
    for spec, s in ctx.layers("theme", ("field", "classes")):
        got = ctx.nodata_color(spec)
        ramp = ctx.ramp_of(spec)
        if got is not None and ramp is not None:
            yield spec, s, ramp, got


def nodata_quiet(ctx: CheckContext) -> list[RuleResult]:
    """A no-data colour covering >= ``budget.nodata.area`` of the canvas: its L* contrast with
    the paper <= the data's median L* contrast with it (common practice, no source)."""
    area = float(ctx.budgets.nodata.area)
    out = []
    for spec, s, ramp, (rgb8, table, key) in _cases(ctx):
        q = quiet_numbers(ctx, s, rgb8)
        if q is None:
            continue
        limit = q.data_contrast
        if q.share < area:
            out.append(RuleResult("nodata-quiet", spec.name, None, limit, True,
                                  f'no-data "{hex8(rgb8)}" shows on {q.share:.1%} of the map '
                                  f"(< {area:.0%}): too little to compete; not judged",
                                  ramp=ramp.name))
            continue
        value = q.contrast
        passed = value <= limit
        msg = (f'no-data "{hex8(rgb8)}" covers {q.share:.0%} of the map at L* {q.nodata_L:.1f} as '
               f"drawn: {value:.1f} L* from the paper (L* {q.paper_L:.1f}), louder than the "
               if not passed else
               f'no-data "{hex8(rgb8)}" covers {q.share:.0%} of the map at L* {q.nodata_L:.1f} as '
               f"drawn: {value:.1f} L* from the paper (L* {q.paper_L:.1f}), no louder than the ")
        msg += f"data's median {limit:.1f} L*"
        fix, change = "", None
        if not passed:
            new = solve_quiet_nodata(ctx, ramp, rgb8, q)
            if new is None:
                fix = ("no neutral near the paper is both quiet and far enough from the ramp: "
                       'make it "transparent" so the paper or relief shows')
                change = Change(table, {key: "transparent"}) if table == layer_key(spec.name) \
                    else None
            else:
                Ln, Cn, _ = srgb_to_lch(new / 255.0)
                fix = (f'a light neutral near the paper: {key} = "{hex8(new)}" in {table} '
                       f"(L* {Ln:.1f}, C* {Cn:.1f}; still >= {ctx.budgets.nodata.separation:g} "
                       "dE00 from the paper and the ramp)")
                change = Change(table, {key: hex8(new)})
        out.append(RuleResult("nodata-quiet", spec.name, value, limit, passed, msg, fix,
                              ramp=ramp.name, change=change))
    return out

