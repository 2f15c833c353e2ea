"""Per-layer budget plots for the HTML proof page (matplotlib object interface, no pyplot).

* ground and theme layers: the layer's own colours in the C*-L* plane (CIELAB, D65), one dot per
  distinct colour in that colour, its area proportional to the pixels it covers; the budget
  drawn on it -- the ground's L* range x C* ceiling as a box; for themes the C* maximum (p95)
  and, when stated, minimum (p50), and the chroma kept for the ground (ground C* p95 + margin)
  shaded; the measured p5..p95 box dotted.
* overlays: the L* histogram of what lay beneath the judged part (bars in the grey of each L*),
  the band of L* where the part's WCAG contrast falls short shaded, and the contrast-ratio
  histogram with the limit and the share of pixels reaching it.

All numbers come from the render's statistics (:mod:`compose.check.stats`) and the checker's
own judgement of overlays (:func:`compose.check.legibility.judge`).
"""
from __future__ import annotations

import numpy as np

from compose.check.stats import CONTRAST_STEP, N_CONTRAST
from compose.color.lab import lab_to_srgb, srgb_to_lch, xyz_to_lab
from compose.color import interface as ui
from compose.color.wcag import relative_luminance

__all__ = ["budget_figure", "lightness_chroma_figure", "overlay_figure", "ground_reserve"]

INK, MUTED, BOX, GRID = ui.INK.hex, ui.MUTED.hex, ui.ACCENT.hex, ui.GRID.hex
FIG_W, FIG_H = 4.2, 3.3     # inches


def _axes_style(ax) -> None:
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.tick_params(labelsize=8, colors=INK)
    ax.grid(True, color=GRID, lw=0.6, zorder=0)


def _lightness_of_y(y: float) -> float:
    return float(xyz_to_lab(np.array([0.0, float(y), 0.0]))[0])


def ground_reserve(ctx) -> float | None:
    """The largest ground C* p95 plus ``budget.theme.margin``: the chroma kept for the ground."""
    values = []
    for _, s in ctx.layers("ground"):
        _, (_, _, c95) = s.lightness_chroma()
        if c95 == c95:
            values.append(c95)
    return (max(values) + float(ctx.budgets.theme.margin)) if values else None


def lightness_chroma_figure(spec, s, ctx, passed: bool | None):
    """The C*-L* plot of a ground or theme layer with its budget (see the module docstring)."""
    from matplotlib.figure import Figure
    from matplotlib.patches import Rectangle

    theme = spec.role == "theme"
    colors, weights = s.colors_and_weights(data_only=theme)
    keep = weights > 0
    colors, weights = colors[keep], weights[keep]
    fig = Figure(figsize=(FIG_W, FIG_H), dpi=110)
    ax = fig.add_axes((0.13, 0.14, 0.82, 0.7))
    _axes_style(ax)
    if colors.shape[0] == 0:
        ax.text(0.5, 0.5, "nothing drawn", transform=ax.transAxes, ha="center", color=MUTED)
        return fig
    lch = srgb_to_lch(colors / 255.0)
    (l5, _, l95), (c5, c50, c95) = s.lightness_chroma(data_only=theme)
    gb, tb = ctx.budgets.ground, ctx.budgets.theme
    reserve = ground_reserve(ctx) if theme else None
    xmax = max(40.0, float(lch[:, 1].max()) * 1.2,
               (gb.chroma[1] * 2.5) if spec.role == "ground" else 0.0,
               (reserve or 0) * 1.25, (tb.chroma[0] * 1.3) if theme and tb.chroma_min_stated else 0)
    order = np.argsort(weights)
    share = weights / weights.sum()
    size = 6 + 220 * np.sqrt(share / share.max())
    ax.scatter(lch[order, 1], lch[order, 0], s=size[order], c=colors[order] / 255.0,
               edgecolors=ui.DOT_EDGE.hex, linewidths=0.3, zorder=3)
    verdict = ui.verdict_color(passed).hex
    ax.add_patch(Rectangle((c5, l5), max(c95 - c5, 0.15), l95 - l5, fill=False, ls=":",
                           edgecolor=verdict, lw=1.2, zorder=4))
    if spec.role == "ground":
        lo, hi = gb.lightness
        ax.add_patch(Rectangle((0, lo), gb.chroma[1], hi - lo, facecolor=BOX, alpha=0.07, zorder=1))
        ax.add_patch(Rectangle((0, lo), gb.chroma[1], hi - lo, fill=False, edgecolor=BOX,
                               lw=1.1, ls="--", zorder=2))
        ax.text(gb.chroma[1], hi + 1.5, f" budget L* {lo:g}–{hi:g}, C* ≤ {gb.chroma[1]:g}",
                fontsize=7, color=BOX, va="bottom", ha="left" if gb.chroma[1] < xmax * 0.5 else "right")
        title = f"L* p5–p95 {l5:.1f}–{l95:.1f}   C* p95 {c95:.1f}"
    elif theme:
        if reserve is not None:
            ax.axvspan(0, reserve, color=ui.SHADE.hex, alpha=0.12, zorder=1, lw=0)
            ax.text(reserve / 2, 3, "kept for\nthe ground", fontsize=6.5, color=MUTED, ha="center",
                    va="bottom")
        cmax = float(tb.chroma[1])
        if cmax <= xmax:
            ax.axvline(cmax, color=BOX, ls="--", lw=1.1)
            ax.text(cmax, 101, f"max p95 {cmax:g}", fontsize=7, color=BOX, ha="right", va="bottom")
        else:
            ax.text(0.99, 1.01, f"C* max p95 {cmax:g} →", transform=ax.transAxes, fontsize=7,
                    color=BOX, ha="right", va="bottom")
        if tb.chroma_min_stated:
            ax.axvline(tb.chroma[0], color=BOX, ls="--", lw=1.1)
            ax.text(tb.chroma[0], 101, f"min p50 {tb.chroma[0]:g}", fontsize=7, color=BOX,
                    ha="left", va="bottom")
        ax.plot([c50], [0.8], marker="^", ms=7, color=verdict, clip_on=False, zorder=5)
        ax.plot([c95], [0.8], marker="^", ms=5, color=verdict, mfc=ui.PAPER.hex, clip_on=False, zorder=5)
        title = f"C* p50 {c50:.1f} (▲)   p95 {c95:.1f} (△)   L* {l5:.0f}–{l95:.0f}"
    else:
        title = f"L* p5–p95 {l5:.1f}–{l95:.1f}   C* p95 {c95:.1f}"
    ax.set_xlim(0, xmax)
    ax.set_ylim(0, 100)
    ax.set_xlabel("chroma C*ab", fontsize=8.5, color=INK)
    ax.set_ylabel("lightness L*", fontsize=8, color=INK)
    fig.text(0.02, 0.965, title, fontsize=8, color=INK, va="top")
    if passed is not None:   # the verdict in a mark and a word, not by colour alone
        fig.text(0.98, 0.965, ui.verdict_mark(passed), fontsize=8, color=verdict, va="top",
                 ha="right", weight="bold")
    fig.text(0.02, 0.905, "dots: the layer's colours, area ∝ pixels; dotted: measured p5–p95",
             fontsize=6.5, color=MUTED, va="top")
    return fig


def _gray(L: np.ndarray) -> np.ndarray:
    lab = np.stack([L, np.zeros_like(L), np.zeros_like(L)], axis=-1)
    return np.clip(lab_to_srgb(lab), 0, 1)


def _failing_band(y_fig: float, limit: float) -> tuple[float, float]:
    """L* interval of backgrounds whose WCAG contrast with luminance ``y_fig`` is < ``limit``."""
    y_dark = (y_fig + 0.05) / limit - 0.05        # darker backgrounds reach the limit below this
    y_light = limit * (y_fig + 0.05) - 0.05       # lighter ones above this
    lo = _lightness_of_y(y_dark) if y_dark > 0 else 0.0
    hi = _lightness_of_y(y_light) if y_light < 1 else 100.0
    return lo, hi


def _bars(ax, left: np.ndarray, width: np.ndarray, height: np.ndarray, colors, edge: str,
          lw: float, label: str | None = None) -> None:
    """Bars from 0 to ``height`` as one collection (one artist draws ~50x faster than a patch
    per bar, which is what ``Axes.bar`` makes)."""
    from matplotlib.collections import PolyCollection

    right = left + width
    verts = np.stack([np.stack([left, np.zeros_like(height)], -1), np.stack([left, height], -1),
                      np.stack([right, height], -1), np.stack([right, np.zeros_like(height)], -1)],
                     axis=1)
    ax.add_collection(PolyCollection(verts, facecolors=colors, edgecolors=edge, linewidths=lw,
                                     zorder=2, label=label))
    ax.set_ylim(0, max(float(np.max(height)) if height.size else 0.0, 1e-9) * 1.05)


def overlay_figure(spec, s, j: dict | None, passed: bool | None):
    """Beneath-L* histogram and contrast histogram of an overlay's judged part (``j`` from
    :func:`compose.check.legibility.judge`; None when nothing was drawn)."""
    from matplotlib.figure import Figure

    fig = Figure(figsize=(FIG_W, FIG_H), dpi=110)
    if j is None or j["fig"].beneath_lightness is None:
        fig.text(0.5, 0.5, "nothing drawn; not measured", ha="center", color=MUTED)
        return fig
    part = j["fig"]
    rgb = part.colors[0] / 255.0
    y = float(relative_luminance(rgb))
    L = float(srgb_to_lch(rgb)[0])
    limit = j["limit"]
    verdict = ui.verdict_color(passed).hex
    a1 = fig.add_axes((0.12, 0.58, 0.84, 0.27))
    _axes_style(a1)
    hist = np.asarray(part.beneath_lightness, dtype=float)
    total = hist.sum()
    x = np.arange(hist.size)
    lo, hi = _failing_band(y, limit)
    a1.axvspan(lo, hi, color=ui.FAIL.hex, alpha=0.09, lw=0, zorder=1)
    _bars(a1, x - 0.5, np.ones(x.size), 100 * hist / max(total, 1e-12), _gray(x.astype(float)),
          ui.BAR_EDGE.hex, 0.4, label=f"beneath the {j['part']}")
    if j["outline"] is not None and j["outline"].beneath_lightness is not None:
        oh = np.asarray(j["outline"].beneath_lightness, dtype=float)
        scale = (hist.max() / max(total, 1e-12)) / max(oh.max() / max(oh.sum(), 1e-12), 1e-12)
        a1.step(x, 100 * scale * oh / max(oh.sum(), 1e-12), where="mid", color=BOX, lw=0.9,
                zorder=3, label=f"beneath the {j['outline_name']} (scaled to the same peak)")
        a1.legend(fontsize=6.5, frameon=True, framealpha=0.9, edgecolor="none", loc="best")
    a1.axvline(L, color=rgb, lw=2.4, zorder=4)
    a1.axvline(L, color=INK, lw=0.5, zorder=5)
    a1.text(L, 1.02, f"{j['part']} L* {L:.0f}", transform=a1.get_xaxis_transform(), fontsize=7,
            ha="center", va="bottom", color=INK)
    a1.set_xlim(0, 100)
    a1.set_xlabel(f"L* of what lies beneath the {j['part']} (shaded: contrast < {limit:g}:1)",
                  fontsize=8, color=INK)
    a1.set_ylabel("% pixels", fontsize=8, color=INK)
    a2 = fig.add_axes((0.12, 0.14, 0.84, 0.24))
    _axes_style(a2)
    c = np.asarray(part.contrast if part.contrast is not None else np.zeros(N_CONTRAST), float)
    edges = np.geomspace(1.0, 21.0, 61)
    ratio = 1.0 + np.arange(N_CONTRAST) * CONTRAST_STEP + CONTRAST_STEP / 2
    coarse, _ = np.histogram(ratio, bins=edges, weights=c)
    coarse = 100 * coarse / max(c.sum(), 1e-12)
    mids = np.sqrt(edges[:-1] * edges[1:])
    _bars(a2, edges[:-1], np.diff(edges), coarse,
          np.where(mids >= limit, ui.PASS_LIGHT.hex, ui.FAIL_LIGHT.hex), ui.PAPER.hex, 0.3)
    a2.axvline(limit, color=INK, lw=0.9, ls="--")
    a2.set_xscale("log")
    a2.set_xlim(1, 21)
    ticks = [1, 1.5, 2, 3, 4.5, 7, 10, 21]
    a2.set_xticks(ticks, [f"{t:g}" for t in ticks])
    a2.minorticks_off()
    a2.set_xlabel(f"WCAG contrast of the {j['part']} against what lies beneath", fontsize=7.5,
                  color=INK)
    a2.set_ylabel("% pixels", fontsize=8, color=INK)
    share = j["share"]
    text = (f"{share:.1%} reach {limit:g}:1 (need {j['need']:.0%})" if share == share
            else "no pixels measured")
    if j["by_casing"]:
        text += f"; passes by its {j['outline_name']} ({j['casing']:.1%})"
    if passed is not None:   # the verdict in a mark as well as a colour
        text = f"{ui.MARKS['pass' if passed else 'fail']} {text}"
    fig.text(0.02, 0.965, text, fontsize=8, color=verdict, va="top", weight="bold")
    return fig


def budget_figure(spec, s, ctx, passed: bool | None):
    """The budget plot of one layer: overlays by contrast, the rest in the C*-L* plane."""
    if spec.role == "overlay":
        from compose.check.legibility import judge
        j = judge(ctx, spec, s)
        if j is not None:
            return overlay_figure(spec, s, j, passed)
    return lightness_chroma_figure(spec, s, ctx, passed)
