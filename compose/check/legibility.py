"""Overlay legibility: WCAG contrast shares and the optional size-aware colour difference.

**The contrast rule implemented** (rule ids ``overlay-contrast`` and ``label-contrast``):
an overlay's *figure* part -- the stroke of lines, the outline of areas (their fill when they
have no outline), the marker of points, the text of labels -- is judged by the share of its
coverage-weighted pixels whose WCAG 2 contrast ratio against what lay beneath it just before it
was drawn is >= the limit (``budget.overlay.contrast``, 3:1, WCAG 2.1 SC 1.4.11 non-text
contrast; ``label_contrast``, 4.5:1, SC 1.4.3, for labels). The share must be >=
``budget.overlay.share``. Thresholds are not rounded (2.999 fails 3; WCAG understanding docs).

* With a halo (or, for points, the outline ring drawn beneath the marker) the figure is judged
  against that outline, which is what lies beneath it. How the outline itself stands out from
  the ground is reported as information: a halo that melts into the ground is normal practice.
* Lines, areas and points also pass when their outline reaches the share against the ground:
  a dark casing around a dark stroke reads as one wider mark (common practice, no source).
  Labels do not get this exception: glyphs inside a halo of their own tone cannot be read.

**Size-aware variant** (``overlay-size``, only when ``budget.overlay.viewing_distance`` > 0 mm):
thin strokes need larger colour differences. Stone, Szafir & Setlur (2014) model the 50 %
noticeable difference per CIELAB axis at a mark size of s degrees of visual angle as
ND = C + K / s; parameters C = (5.079, 5.339, 5.349), K = (0.751, 1.541, 2.871) for (L*, a*,
b*) are those of two public implementations, *not checked against the paper's table*
(/work/shared/references.md section 7). A beneath colour counts as distinct when
sqrt(sum((d_i / ND_i)^2)) >= 1 (the scaled-Euclidean reading of the model). s is the stroke
width (points -> mm) seen from the viewing distance: s = 2 atan(w / 2d). The paper tested sizes
down to about 1/3 degree; thinner strokes are extrapolated and the message says so.
"""
from __future__ import annotations

import math

import numpy as np

from compose.check.context import CheckContext, layer_key
from compose.check.fixes import halo_color, hex8, lch_rgb8, luminance8, solve_contrast_lightness
from compose.check.report import Change, RuleResult
from compose.check.stats import beneath_color_centres, contrast_share, histogram_percentiles
from compose.color.lab import srgb_to_lab, srgb_to_lch

__all__ = ["FIGURE", "OUTLINE", "ND_C", "ND_K", "figure_part", "judge", "overlay_contrast",
           "label_contrast", "overlay_size", "visual_angle", "noticeable_difference",
           "distinct_share"]

#: The figure part of each overlay kind, and the style key of its colour.
FIGURE = {"lines": ("stroke", "stroke"), "points": ("marker", "fill"), "labels": ("text", "color")}
#: The outline part drawn beneath the figure, when there is one.
OUTLINE = {"lines": "halo", "areas": "halo", "points": "stroke", "labels": "halo"}

# Stone, Szafir & Setlur (2014), 50 % noticeable difference = C + K / s per (L*, a*, b*);
# 2IMPL values, not checked against the paper's table (references.md section 7).
ND_C = np.array([5.079, 5.339, 5.349])
ND_K = np.array([0.751, 1.541, 2.871])
TESTED_MIN_DEG = 1.0 / 3.0


def figure_part(spec, s) -> tuple[str, str] | None:
    """(part, style key of its colour) judged for an overlay layer, or None."""
    if spec.kind == "areas":
        if "stroke" in s.parts and getattr(spec.options, "width", 0) > 0:
            return "stroke", "stroke"
        return ("fill", "fill") if "fill" in s.parts else None
    return s.figure if s.figure is not None else FIGURE.get(spec.kind)


def _limit(ctx: CheckContext, spec) -> tuple[float, str]:
    ob = ctx.budgets.overlay
    if spec.kind == "labels":
        return float(ob.label_contrast), "WCAG 2.1 SC 1.4.3"
    return float(ob.contrast), "WCAG 2.1 SC 1.4.11"


def judge(ctx: CheckContext, spec, s) -> dict | None:
    """The numbers of the contrast rule for one overlay (see the module docstring)."""
    fp = figure_part(spec, s)
    if fp is None or fp[0] not in s.parts:
        return None
    part, key = fp
    fig = s.parts[part]
    limit, source = _limit(ctx, spec)
    outline_name = s.outline if s.outline is not None else OUTLINE.get(spec.kind)
    outline = s.parts.get(outline_name) if outline_name and outline_name != part else None
    share = contrast_share(fig.contrast, limit)
    casing = contrast_share(outline.contrast, limit) if outline is not None else float("nan")
    need = float(ctx.budgets.overlay.share)
    by_casing = (spec.kind != "labels" and outline is not None and not share >= need
                 and casing >= need)
    return {"part": part, "key": key, "fig": fig, "outline": outline, "outline_name": outline_name,
            "limit": limit, "source": source, "share": share, "casing": casing, "need": need,
            "passed": bool(share >= need or by_casing), "by_casing": by_casing,
            "beneath": histogram_percentiles(fig.beneath_lightness)}


def _contrast_fix(ctx: CheckContext, spec, j: dict) -> tuple[str, Change | None]:
    fig = j["fig"]
    rgb = fig.colors[0] / 255.0
    L = float(srgb_to_lch(rgb)[0])
    dark, light = solve_contrast_lightness(rgb, fig.beneath_lightness, j["limit"], j["need"])
    what = f'the {spec.name} {j["part"]}'
    options = []
    change = None
    for cand, verb in ((dark, "darken"), (light, "lighten")):
        if cand is None:
            continue
        Lc = float(srgb_to_lch(cand / 255.0)[0])
        options.append((abs(Lc - L), f'{verb} {what} to L* {"<=" if verb == "darken" else ">="} '
                        f'{Lc:.1f} ({j["key"]} = "{hex8(cand)}")', Change(layer_key(spec.name),
                                                                          {j["key"]: hex8(cand)})))
    options.sort(key=lambda t: t[0])
    texts = [t for _, t, _ in options]
    if options:
        change = options[0][2]
    outline = _halo_near_ground(rgb, fig, ctx.background, j["limit"] * 1.05)
    if outline is None:
        outline = halo_color(rgb, j["limit"] * 1.05)
    if outline is not None and j["outline"] is None and j["part"] != "fill":
        if spec.kind == "points":
            texts.append(f'add an outline ring: stroke = "{hex8(outline)}", width = 0.5')
            extra = {"stroke": hex8(outline), "width": 0.5}
        else:
            w = float(getattr(spec.options, "width", 0) or 0)
            px = w * ctx.dpi / 72.0
            hw = 1.5 if spec.kind == "labels" else max(w + 1.0, (px + 3.0) * 72.0 / ctx.dpi)
            hw = math.ceil(hw * 10) / 10
            texts.append(f'add a halo = {{ color = "{hex8(outline)}", width = {hw:g} }}')
            extra = {"halo": {"color": hex8(outline), "width": hw}}
        change = change or Change(layer_key(spec.name), extra)
    elif outline is not None and j["outline"] is not None:
        if j["outline_name"] == "halo":
            w = float(getattr(getattr(spec.options, "halo", None), "width", 1.5))
            texts.append(f'set the halo colour to "{hex8(outline)}"')
            extra = {"halo": {"color": hex8(outline), "width": w}}
        else:
            texts.append(f'set the outline ring (stroke) to "{hex8(outline)}"')
            extra = {"stroke": hex8(outline)}
        change = change or Change(layer_key(spec.name), extra)
    if not texts:
        return "no lightness of this hue reaches the limit here; add a halo or change the ground", None
    return "; or ".join(texts), change


def _halo_near_ground(rgb, fig, background, limit: float):
    """An outline colour (8-bit) close to what lies beneath the figure -- the ground's hue, its
    chroma capped at 10, the lightness nearest the ground's median L* that reaches WCAG ``limit``
    against the figure -- so the casing melts into the map instead of drawing a grey tube. None
    when no lightness of that hue reaches it."""
    hist = getattr(fig, "beneath_colors", None)
    if hist is None or float(np.sum(hist)) <= 0:
        base = np.asarray(background, dtype=float)
        weights = None
    else:
        keep = np.nonzero(hist > 0)[0]
        base, weights = beneath_color_centres(keep), hist[keep]
    lch = np.atleast_2d(srgb_to_lch(np.atleast_2d(base)))
    if weights is None:
        Lb, Cb, hb = lch[0]
    else:
        order = np.argsort(lch[:, 0])
        cdf = np.cumsum(weights[order]) / np.sum(weights)
        Lb, Cb, hb = lch[order[min(int(np.searchsorted(cdf, 0.5)), len(order) - 1)]]
    y_fig = float(luminance8(np.rint(np.asarray(rgb) * 255)))
    grid = np.arange(0.0, 100.01, 0.5)
    cand = lch_rgb8(np.stack([grid, np.full_like(grid, min(float(Cb), 10.0)),
                              np.full_like(grid, float(hb))], axis=-1))
    y = luminance8(cand)
    ratio = (np.maximum(y, y_fig) + 0.05) / (np.minimum(y, y_fig) + 0.05)
    ok = np.nonzero(ratio >= limit)[0]
    if ok.size == 0:
        return None
    return cand[ok[np.argmin(np.abs(grid[ok] - float(Lb)))]]


def _contrast_rule(ctx: CheckContext, kinds: tuple[str, ...], rule: str) -> list[RuleResult]:
    out = []
    for spec, s in ctx.layers("overlay", kinds):
        j = judge(ctx, spec, s)
        if j is None:
            out.append(RuleResult(rule, spec.name, None, ctx.budgets.overlay.share, True,
                                  "nothing drawn on the canvas; not measured"))
            continue
        against = f'the {j["outline_name"]}' if j["outline"] is not None else "what lies beneath"
        msg = (f'{j["share"]:.1%} of {j["part"]} pixels reach WCAG contrast {j["limit"]:g}:1 '
               f'({j["source"]}) against {against}; need {j["need"]:.0%}')
        if j["outline"] is not None:
            msg += (f'; {j["outline_name"]} vs ground: {j["casing"]:.1%} reach it'
                    + (" (passes as a casing)" if j["by_casing"] else " (information)"))
        fix, change = ("", None) if j["passed"] else _contrast_fix(ctx, spec, j)
        value = j["casing"] if j["by_casing"] else j["share"]
        out.append(RuleResult(rule, spec.name, value, j["need"], j["passed"], msg, fix,
                              change=change))
    return out


def overlay_contrast(ctx: CheckContext) -> list[RuleResult]:
    """Lines, areas and points: share of figure pixels with WCAG contrast >= 3:1 (SC 1.4.11)."""
    # every overlay kind drawn as a mark (its kind's figure part, see compose.measure), not text
    marks = tuple({st.kind for st in ctx.stats.layers if st.figure is not None
                   and st.figure[0] != "text"} | {"lines", "areas", "points"})
    return _contrast_rule(ctx, marks, "overlay-contrast")


def label_contrast(ctx: CheckContext) -> list[RuleResult]:
    """Labels: share of text pixels with WCAG contrast >= 4.5:1 (SC 1.4.3) against the halo or
    what lies beneath."""
    return _contrast_rule(ctx, ("labels",), "label-contrast")


# --- size-aware -----------------------------------------------------------------------------

def visual_angle(width_pt: float, distance_mm: float) -> float:
    """Visual angle in degrees of a mark ``width_pt`` points (1/72 inch) wide seen from
    ``distance_mm``: 2 atan(w / 2d)."""
    w_mm = float(width_pt) * 25.4 / 72.0
    return math.degrees(2.0 * math.atan(w_mm / (2.0 * float(distance_mm))))


def noticeable_difference(size_deg: float) -> np.ndarray:
    """50 % noticeable difference (dL*, da*, db*) at a mark size in degrees (Stone et al. 2014)."""
    return ND_C + ND_K / float(size_deg)


def distinct_share(lab_fig: np.ndarray, beneath_hist: np.ndarray, size_deg: float) -> np.ndarray:
    """Share (0-1) of the beneath-colour histogram distinct from figure colours ``lab_fig``
    (k, 3) at mark size ``size_deg`` -> (k,)."""
    keep = np.nonzero(beneath_hist > 0)[0]
    w = beneath_hist[keep]
    lab_b = srgb_to_lab(beneath_color_centres(keep))
    nd = noticeable_difference(size_deg)
    d = (np.asarray(lab_fig, dtype=float)[:, None, :] - lab_b[None, :, :]) / nd
    distinct = np.sqrt(np.sum(d * d, axis=-1)) >= 1.0
    return (distinct * w).sum(axis=1) / w.sum()


def overlay_size(ctx: CheckContext) -> list[RuleResult]:
    """Thin strokes against what lies beneath, by the size-dependent difference model."""
    distance = float(getattr(ctx.budgets.overlay, "viewing_distance", 0.0) or 0.0)
    if distance <= 0:
        return []
    need = float(ctx.budgets.overlay.share)
    out = []
    for spec, s in ctx.layers("overlay", ("lines", "areas")):
        part = s.parts.get("stroke")
        width = float(getattr(spec.options, "width", 0) or 0)
        if part is None or width <= 0 or part.beneath_colors is None or part.beneath_colors.sum() <= 0:
            continue
        size = visual_angle(width, distance)
        lab = srgb_to_lab(part.colors[0] / 255.0)
        share = float(distinct_share(lab[None, :], part.beneath_colors, size)[0])
        passed = share >= need
        nd = noticeable_difference(size)
        note = "" if size >= TESTED_MIN_DEG else "; below the tested 1/3 degree: extrapolated"
        msg = (f"{share:.1%} of stroke pixels differ noticeably from what lies beneath at "
               f"{width:g} pt seen from {distance:g} mm ({size:.3f} deg; ND = {nd[0]:.1f}/{nd[1]:.1f}/"
               f"{nd[2]:.1f} dL*/da*/db*; Stone, Szafir & Setlur 2014, parameters not checked "
               f"against the paper){note}; need {need:.0%}")
        fix, change = "", None
        if not passed:
            fix, change = _size_fix(spec, part, lab, width, distance, need)
        out.append(RuleResult("overlay-size", spec.name, share, need, passed, msg, fix, change=change))
    return out


def _size_fix(spec, part, lab, width, distance, need) -> tuple[str, Change | None]:
    """A wider stroke covers other pixels than the measured ones, so the width is chosen to
    reach halfway between the required share and 100 % on the measured beneath colours."""
    texts, change = [], None
    target = need + (1.0 - need) / 2
    widths = np.round(np.arange(width + 0.05, max(width * 8, 12.0), 0.05), 2)
    for w in widths:
        if distinct_share(lab[None, :], part.beneath_colors, visual_angle(w, distance))[0] >= target:
            texts.append(f"widen the stroke from {width:g} to >= {w:g} pt")
            change = Change(layer_key(spec.name), {"width": float(w)})
            break
    L, C, h = srgb_to_lch(part.colors[0] / 255.0)
    grid = np.arange(0.0, 100.01, 0.5)
    cand = lch_rgb8(np.stack([grid, np.full_like(grid, C), np.full_like(grid, h)], -1))
    shares = distinct_share(srgb_to_lab(cand / 255.0), part.beneath_colors, visual_angle(width, distance))
    ok = np.nonzero(shares >= need)[0]
    if ok.size:
        i = ok[np.argmin(np.abs(grid[ok] - L))]
        texts.append(f'set its lightness to L* {grid[i]:.1f} (stroke = "{hex8(cand[i])}")')
        if change is None:
            change = Change(layer_key(spec.name), {"stroke": hex8(cand[i])})
    return ("; or ".join(texts) or "no width up to 12 pt or lightness reaches it"), change
