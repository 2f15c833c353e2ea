"""Per-layer budget plots for the HTML review page, drawn as SVG (:mod:`compose.output.svg`).

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
from compose.color import interface as ui
from compose.color.lab import lab_to_srgb, srgb_to_lch, xyz_to_lab
from compose.color.wcag import relative_luminance
from compose.output.svg import PLOT_W, Figure, nice_ticks

__all__ = ["budget_svg", "lightness_chroma_svg", "overlay_svg", "ramp_svg", "ground_reserve"]

INK, MUTED, BOX, GRID = ui.INK.hex, ui.MUTED.hex, ui.ACCENT.hex, ui.GRID.hex
FIG_W, FIG_H = PLOT_W, 330    # CSS pixels


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


_BYTE_HEX = tuple(f"{i:02x}" for i in range(256))


def _hex(rgb) -> str:
    """sRGB floats (3,) in [0, 1] (clipped) -> "#rrggbb"."""
    return "#" + "".join(_BYTE_HEX[int(round(min(max(float(v), 0.0), 1.0) * 255))] for v in rgb)


def _hexes(rgb) -> list[str]:
    """:func:`_hex` of every row of (n, 3) sRGB floats, at once (the same rounding: half to
    even)."""
    codes = np.rint(np.clip(np.asarray(rgb, dtype=float).reshape(-1, 3), 0.0, 1.0) * 255)
    packed = codes.astype(np.int64) @ np.array([1 << 16, 1 << 8, 1], np.int64)
    return [f"#{v:06x}" for v in packed.tolist()]


def _title(fig: Figure, text: str, passed: bool | None, note: str = "") -> None:
    fig.text(8, 16, text, 11, INK)
    if passed is not None:   # the verdict in a mark and a word, not by colour alone
        fig.text(FIG_W - 8, 16, ui.verdict_mark(passed), 11, ui.verdict_color(passed).hex,
                 anchor="end", weight="bold")
    if note:
        fig.text(8, 31, note, 9, MUTED)


def lightness_chroma_svg(spec, s, ctx, passed: bool | None) -> str:
    """The C*-L* plot of a ground or theme layer with its budget (see the module docstring)."""
    theme = spec.role == "theme"
    colors, weights = s.colors_and_weights(data_only=theme)
    keep = weights > 0
    colors, weights = colors[keep], weights[keep]
    fig = Figure(FIG_W, FIG_H, ui.PAPER.hex)
    if colors.shape[0] == 0:
        fig.text(FIG_W / 2, FIG_H / 2, "nothing drawn", 11, MUTED, anchor="middle")
        return fig.svg()
    lch = srgb_to_lch(colors / 255.0)
    (l5, _, l95), (c5, c50, c95) = s.lightness_chroma(data_only=theme)
    gb, tb = ctx.budgets.ground, ctx.budgets.theme
    reserve = ground_reserve(ctx) if theme else None
    xmax = max(40.0, float(lch[:, 1].max()) * 1.2,
               (gb.chroma[1] * 2.5) if spec.role == "ground" else 0.0,
               (reserve or 0) * 1.25, (tb.chroma[0] * 1.3) if theme and tb.chroma_min_stated else 0)
    ax = fig.axes(56, 52, FIG_W - 14, FIG_H - 46, (0, xmax), (0, 100))
    ax.frame(nice_ticks(0, xmax), [0, 20, 40, 60, 80, 100], "chroma C*ab", "lightness L*", INK,
             GRID)
    verdict = ui.verdict_color(passed).hex
    if spec.role == "ground":
        lo, hi = gb.lightness
        ax.rect(0, lo, gb.chroma[1], hi, fill=BOX, opacity=0.07)
        ax.rect(0, lo, gb.chroma[1], hi, stroke=BOX, width=1.3, dash="5 3")
        right = gb.chroma[1] < xmax * 0.5
        ax.text(gb.chroma[1], min(hi, 97), f" budget L* {lo:g}–{hi:g}, C* ≤ {gb.chroma[1]:g}", 9,
                BOX, anchor="start" if right else "end", dy=-3)
        title = f"L* p5–p95 {l5:.1f}–{l95:.1f}   C* p95 {c95:.1f}"
    elif theme:
        if reserve is not None:
            ax.rect(0, 0, reserve, 100, fill=ui.SHADE.hex, opacity=0.12)
            ax.text(reserve / 2, 4, "kept for the ground", 8, MUTED, anchor="middle")
        cmax = float(tb.chroma[1])
        if cmax <= xmax:
            ax.vline(cmax, BOX, 1.3, "5 3")
            ax.text(cmax, 100, f"max p95 {cmax:g} ", 9, BOX, anchor="end", dy=-3)
        else:
            fig.text(FIG_W - 14, 46, f"C* max p95 {cmax:g} →", 9, BOX, anchor="end")
        if tb.chroma_min_stated:
            ax.vline(tb.chroma[0], BOX, 1.3, "5 3")
            ax.text(tb.chroma[0], 100, f" min p50 {tb.chroma[0]:g}", 9, BOX, dy=-3)
        title = f"C* p50 {c50:.1f} (▲)   p95 {c95:.1f} (△)   L* {l5:.0f}–{l95:.0f}"
    else:
        title = f"L* p5–p95 {l5:.1f}–{l95:.1f}   C* p95 {c95:.1f}"
    order = np.argsort(weights)
    share = weights / weights.sum()
    radius = 1.4 + 8.5 * np.sqrt(share / share.max())      # area proportional to pixels
    edge = ui.DOT_EDGE.hex
    fills = _hexes(colors / 255.0)
    for i in order[-600:]:                                   # the 600 largest are plenty
        ax.dot(float(lch[i, 1]), float(lch[i, 0]), float(radius[i]), fills[i], edge, 0.4)
    ax.rect(c5, l5, max(c95, c5 + 0.15), l95, stroke=verdict, width=1.4, dash="2 2")
    if theme:
        ax.marker(c50, 0, 5, verdict)
        ax.marker(c95, 0, 4, verdict, filled=False)
    _title(fig, title, passed, "dots: the layer's colours, area ∝ pixels; dotted: measured p5–p95")
    return fig.svg()


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


def overlay_svg(spec, s, j: dict | None, passed: bool | None) -> str:
    """Beneath-L* histogram and contrast histogram of an overlay's judged part (``j`` from
    :func:`compose.check.legibility.judge`; None when nothing was drawn)."""
    fig = Figure(FIG_W, FIG_H, ui.PAPER.hex)
    if j is None or j["fig"].beneath_lightness is None:
        fig.text(FIG_W / 2, FIG_H / 2, "nothing drawn; not measured", 11, MUTED, anchor="middle")
        return fig.svg()
    part = j["fig"]
    rgb = part.colors[0] / 255.0
    y = float(relative_luminance(rgb))
    L = float(srgb_to_lch(rgb)[0])
    limit = j["limit"]
    verdict = ui.verdict_color(passed).hex
    hist = np.asarray(part.beneath_lightness, dtype=float)
    total = hist.sum()
    pct = 100 * hist / max(total, 1e-12)
    top = max(float(pct.max()), 1e-9) * 1.08
    a1 = fig.axes(50, 48, FIG_W - 14, 150, (0, 100), (0, top))
    a1.frame([0, 20, 40, 60, 80, 100], nice_ticks(0, top, 3),
             f"L* beneath the {j['part']} (shaded: contrast < {limit:g}:1)", "% pixels", INK, GRID, 9)
    lo, hi = _failing_band(y, limit)
    a1.rect(lo, 0, hi, top, fill=ui.FAIL.hex, opacity=0.09)
    x = np.arange(hist.size, dtype=float)
    grays = _hexes(_gray(x))
    a1.bars(x - 0.5, x + 0.5, pct, grays, ui.BAR_EDGE.hex, 0.4)
    if j["outline"] is not None and j["outline"].beneath_lightness is not None:
        oh = np.asarray(j["outline"].beneath_lightness, dtype=float)
        scale = (hist.max() / max(total, 1e-12)) / max(oh.max() / max(oh.sum(), 1e-12), 1e-12)
        a1.polyline(np.repeat(x, 2) + np.tile([-0.5, 0.5], x.size),
                    np.repeat(100 * scale * oh / max(oh.sum(), 1e-12), 2), BOX, 1.1)
        fig.text(8, 34, f"line: L* beneath the {j['outline_name']} (scaled to the same peak)", 9,
                 BOX)
    a1.vline(L, _hex(rgb), 3.0)
    a1.vline(L, INK, 0.6)
    a1.text(L, top, f"{j['part']} L* {L:.0f}", 9, INK, anchor="middle", dy=-3)
    c = np.asarray(part.contrast if part.contrast is not None else np.zeros(N_CONTRAST), float)
    edges = np.geomspace(1.0, 21.0, 61)
    ratio = 1.0 + np.arange(N_CONTRAST) * CONTRAST_STEP + CONTRAST_STEP / 2
    coarse, _ = np.histogram(ratio, bins=edges, weights=c)
    coarse = 100 * coarse / max(c.sum(), 1e-12)
    mids = np.sqrt(edges[:-1] * edges[1:])
    ctop = max(float(coarse.max()), 1e-9) * 1.08
    a2 = fig.axes(50, 205, FIG_W - 14, FIG_H - 44, (1, 21), (0, ctop), xlog=True)
    a2.frame([1, 1.5, 2, 3, 4.5, 7, 10, 21], nice_ticks(0, ctop, 3),
             f"WCAG contrast of the {j['part']} against what lies beneath", "% pixels", INK, GRID, 9)
    good, bad = ui.PASS_LIGHT.hex, ui.FAIL_LIGHT.hex
    a2.bars(edges[:-1], edges[1:], coarse, [good if m >= limit else bad for m in mids],
            ui.PAPER.hex, 0.3)
    a2.vline(limit, INK, 1.0, "4 3")
    share = j["share"]
    text = (f"{share:.1%} reach {limit:g}:1 (need {j['need']:.0%})" if share == share
            else "no pixels measured")
    if j["by_casing"]:
        text += f"; passes by its {j['outline_name']} ({j['casing']:.1%})"
    if passed is not None:   # the verdict in a mark as well as a colour
        text = f"{ui.MARKS['pass' if passed else 'fail']} {text}"
    fig.text(8, 18, text, 11, verdict, weight="bold")
    return fig.svg()


def budget_svg(spec, s, ctx, passed: bool | None) -> str:
    """The budget plot of one layer as SVG text: overlays by contrast, the rest in the C*-L*
    plane."""
    if spec.role == "overlay":
        from compose.check.legibility import judge
        j = judge(ctx, spec, s)
        if j is not None:
            return overlay_svg(spec, s, j, passed)
    return lightness_chroma_svg(spec, s, ctx, passed)


RAMP_W, RAMP_H = 420, 250   # CSS pixels


def ramp_svg(ramp, lut) -> str:
    """A ramp as the page shows it: the drawn colours (its lookup table ``lut``) and, for a
    continuous or stepped ramp, its L* and C*ab along the data value; a qualitative ramp as
    swatches with their class values. The full diagnostic figure is ``compose ramp --plot``."""
    n = lut.n
    rgb = np.asarray(lut.rgb8[:n], dtype=float) / 255.0
    values = np.asarray(lut.values[:n], dtype=float)
    fig = Figure(RAMP_W, RAMP_H if ramp.kind != "qualitative" else 90, ui.PAPER.hex)
    fig.text(8, 16, f"{ramp.name} ({ramp.kind})", 11, INK, weight="bold")
    if ramp.kind == "qualitative":
        w = (RAMP_W - 16) / max(n, 1)
        ax = fig.axes(8, 26, RAMP_W - 8, 60, (0, n), (0, 1))
        fills = _hexes(rgb)
        for i in range(n):
            ax.rect(i, 0, i + 1, 1, fill=fills[i], stroke=ui.PAPER.hex, width=1.5)
            if w > 22:
                ax.text(i + 0.5, 0, f"{values[i]:g}", 9, INK, anchor="middle", dy=13)
        return fig.svg()
    lo, hi = (float(v) for v in ramp.domain)
    edges = np.asarray(lut.edges, dtype=float)           # (n + 1,) interval edges
    strip = fig.axes(48, 26, RAMP_W - 14, 52, (lo, hi), (0, 1))
    fills = _hexes(rgb)
    for i in range(n):
        strip.rect(float(edges[i]), 0, float(edges[i + 1]), 1, fill=fills[i], stroke=fills[i],
                   width=0.6)
    lch = srgb_to_lch(rgb)
    ax = fig.axes(48, 66, RAMP_W - 14, RAMP_H - 44, (lo, hi), (0, 100))
    ax.frame(nice_ticks(lo, hi, 5), [0, 25, 50, 75, 100], "data value",
             "L* / C*ab", INK, GRID, 9)
    xs = values if not lut.stepped else np.repeat(edges, 2)[1:-1]
    ls = lch[:, 0] if not lut.stepped else np.repeat(lch[:, 0], 2)
    cs = lch[:, 1] if not lut.stepped else np.repeat(lch[:, 1], 2)
    ax.polyline(xs, ls, INK, 1.6)
    ax.polyline(xs, cs, BOX, 1.6)
    fig.text(RAMP_W - 14, 16, "L*", 10, INK, anchor="end", weight="bold")
    fig.text(RAMP_W - 34, 16, "C*ab", 10, BOX, anchor="end", weight="bold")
    return fig.svg()
