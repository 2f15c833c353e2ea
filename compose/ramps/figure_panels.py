"""The four profile panels of the ramp figure (:mod:`compose.ramps.figure`): lightness,
chroma, evenness and difference, each drawn against the limits the ramp rules judge by.
Interface colours come from :mod:`compose.color.interface`."""
from __future__ import annotations

import numpy as np

from compose.color import interface as ui
from compose.color.difference import delta_e_2000
from compose.color.gamut import max_chroma
from compose.color.lab import lab_to_lch, srgb_to_lab
from compose.color.parse import to_rgb8
from compose.ramps.figure_classes import swatch
from compose.ramps.lut import lut_for
from compose.ramps.metrics import ORDER_SAMPLES, RampLimits, RampMetrics, vision_lab
from compose.ramps.model import Ramp

__all__ = ["style_axes", "profile", "reversal_label", "lightness_panel", "chroma_panel",
           "evenness_panel", "difference_panel"]

INK, MUTED, GRID = ui.INK.hex, ui.MUTED.hex, ui.GRID.hex


def style_axes(ax, ylabel: str) -> None:
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(ui.FRAME.hex)
    ax.tick_params(labelsize=7.5, colors=INK, labelbottom=False)
    ax.grid(True, color=GRID, lw=0.6, zorder=0)
    ax.set_ylabel(ylabel, fontsize=8.5, color=INK)


def profile(ramp: Ramp, x: np.ndarray, drawn: np.ndarray) -> np.ndarray:
    """LCh along ``x``: the unrounded ramp, or the drawn classes of a stepped ramp; NaN across a
    threshold break so no line joins its two sides."""
    lch = lab_to_lch(srgb_to_lab(drawn)) if ramp.stepped else lab_to_lch(ramp.lab_at(x))
    if ramp.at is not None:
        k = int(np.searchsorted(x, ramp.at))
        if 0 < k < len(x):
            lch[k - 1] = np.nan
    return lch


def reversal_label(L: np.ndarray, arms) -> str:
    """Legend text for shaded reversals, or "" when L* keeps its direction everywhere."""
    for arm in arms:
        v = L[arm & np.isfinite(L)]
        if len(v) > 1 and np.any(np.diff(v) * (1.0 if v[-1] >= v[0] else -1.0) < -1e-9):
            return "✗ L* turns back here"
    return ""


def lightness_panel(ax, ramp: Ramp, members, x, lch, lim: RampLimits) -> None:
    band = ui.BAND.hex
    for r, ls in zip(members, ("-", "--", ":", "-.")):
        L = lch[r.name][:, 0]
        ax.plot(x, L, ls, color=INK, lw=1.7 if r is ramp else 1.1, zorder=3,
                label=r.name if r is ramp else f"{r.name} (twin)")
    L = lch[ramp.name][:, 0]
    if ramp.base is not None:   # a twin: its L* must stay within the limit of its base's
        base = lab_to_lch(ramp.base.lab_at(np.linspace(*ramp.base.domain, len(x))))[:, 0]
        ax.fill_between(x, base - lim.twin_dl, base + lim.twin_dl, color=band, lw=0, zorder=1,
                        label=f"base L* ± {lim.twin_dl:g} (twin limit)")
    if ramp.kind == "diverging" and ramp.center is not None:
        mirror = np.interp(2 * ramp.center - x, x, L, left=np.nan, right=np.nan)
        ax.fill_between(x, mirror - lim.symmetry_dl, mirror + lim.symmetry_dl, color=band, lw=0,
                        zorder=1, label=f"mirrored arm ± {lim.symmetry_dl:g} (symmetry limit)")
    if ramp.kind == "threshold" and ramp.at is not None:
        below = float(ramp.lab_at(np.nextafter(ramp.at, -np.inf))[0])
        span = x[-1] - x[0]
        ax.fill_between([ramp.at - 0.02 * span, ramp.at + 0.02 * span], below - lim.break_dl,
                        below + lim.break_dl, color=band, lw=0, zorder=1,
                        label=f"L* at the break ± {lim.break_dl:g}")
    # a reversal of direction (end to end, or per arm away from a diverging centre), shaded failing
    arms = [np.ones(len(x), bool)]
    if ramp.kind == "diverging" and ramp.center is not None:
        arms = [x <= ramp.center, x >= ramp.center]
    for arm in arms:
        idx = np.flatnonzero(arm & np.isfinite(L))
        if len(idx) < 2:
            continue
        sign = 1.0 if L[idx[-1]] >= L[idx[0]] else -1.0
        back = np.diff(L[idx]) * sign < -1e-9
        for i in np.flatnonzero(back):
            ax.axvspan(x[idx[i]], x[idx[i + 1]], color=ui.FAIL_LIGHT.hex, alpha=0.6, lw=0, zorder=0.5)
    if back_label := reversal_label(L, arms):
        ax.plot([], [], color=ui.FAIL_LIGHT.hex, lw=6, alpha=0.6, label=back_label)
    ax.set_ylim(0, 100)
    handles, labels = ax.get_legend_handles_labels()
    if len(labels) > 1:
        ax.legend(fontsize=6.5, frameon=True, framealpha=0.92, edgecolor="none", loc="best")


def chroma_panel(ax, ramp: Ramp, members, x, lch, lim: RampLimits, theme) -> list[str]:
    notes = []
    limits = []
    for r, ls in zip(members, ("-", "--", ":", "-.")):
        C = lch[r.name][:, 1]
        ax.plot(x, C, ls, color=INK, lw=1.7 if r is ramp else 1.1, zorder=3)
        h = np.nan_to_num(lch[r.name][:, 2]) % 360
        limits.append(np.where(np.nan_to_num(C) >= 3, max_chroma(np.nan_to_num(lch[r.name][:, 0]), h), np.nan))
    with np.errstate(all="ignore"):
        limit = np.nanmin(np.where(np.isnan(limits), np.inf, limits), axis=0)
    ax.plot(x, np.where(np.isinf(limit), np.nan, limit), color=ui.SHADE.hex, lw=0.9, ls=(0, (1, 1.5)), zorder=2,
            label="sRGB limit at this L*, h")
    C = lch[ramp.name][:, 1]
    top = float(np.nanmax(C)) * 1.2 + 5
    if theme is not None:
        stated = bool(getattr(theme, "chroma_min_stated", True))
        cmin, cmax = (float(theme.chroma[0]) if stated else 0.0), float(theme.chroma[1])
        if cmax <= top * 1.6:
            top = max(top, cmax * 1.08)
        label = (f"theme budget: C* p50 ≥ {cmin:g}, p95 ≤ {cmax:g}" if stated
                 else f"theme budget: C* p95 ≤ {cmax:g} (no minimum stated)")
        if cmax > top:
            label += " (maximum above the plot)"
        ax.axhspan(cmin, cmax, color=ui.BAND.hex, alpha=0.55, lw=0, zorder=0.8, label=label)
        for v in (cmin, cmax):
            if 0 < v < top:
                ax.axhline(v, color=ui.ACCENT.hex, lw=0.9, ls="--", zorder=1)
        p50, p95 = (float(v) for v in np.nanpercentile(C, [50, 95]))
        inside = (not getattr(theme, "chroma_min_stated", True) or p50 >= cmin) and p95 <= cmax
        mark = ui.MARKS["pass" if inside else "fail"]
        notes.append(f"{mark} the ramp's own C* p50 {p50:.1f}, p95 {p95:.1f} over evenly spread "
                     f"values; compose check judges the map's pixels")
        for v, label in ((p50, "p50"), (p95, "p95")):
            ax.plot([x[-1]], [v], marker="<", ms=5, color=INK, clip_on=False, zorder=4)
            ax.text(x[-1] + (x[-1] - x[0]) * 0.012, v, label, fontsize=6.5, color=INK, va="center")
    if ramp.kind == "diverging" and ramp.center is not None:
        span = x[-1] - x[0]
        ax.add_patch(swatch((ramp.center - 0.015 * span, 0), 0.03 * span, lim.midpoint_chroma,
                            ui.BAND.rgb, edgecolor=ui.ACCENT.hex, lw=0.9, zorder=2))
        notes.append(f"box at the centre: midpoint C* ≤ {lim.midpoint_chroma:g}")
    ax.set_ylim(0, max(top, 10.0))
    ax.legend(fontsize=6.5, frameon=True, framealpha=0.92, edgecolor="none", loc="best")
    return notes


def evenness_panel(ax, ramp: Ramp, lim: RampLimits) -> None:
    # the differences the evenness rule measures, at its worst step size (equal data steps)
    from compose.ramps.metrics import evenness_profile

    mid, pct, _ = evenness_profile(ramp)
    ax.axhspan(100 - lim.step_cv, 100 + lim.step_cv, color=ui.BAND.hex, lw=0, zorder=0.8,
               label=f"mean ± {lim.step_cv:g} % (evenness limit: CV ≤ {lim.step_cv:g} %)")
    ax.axhline(100, color=ui.ACCENT.hex, lw=0.8, ls="--", zorder=1)
    ax.plot(mid, pct, color=INK, lw=1.3, zorder=3)
    far = np.nanmax(np.abs(pct - 100)) if np.isfinite(pct).any() else 0.0
    pad = max(lim.step_cv * 2.5, far * 1.15, 5.0)
    ax.set_ylim(max(0.0, 100 - pad), 100 + pad)
    ax.legend(fontsize=6.5, frameon=True, framealpha=0.92, edgecolor="none", loc="best")


def difference_panel(ax, ramp: Ramp, lim: RampLimits, metrics: RampMetrics) -> None:
    styles = {"normal": "-", "deutan": "--", "protan": ":"}
    lut = lut_for(ramp)
    if lut.stepped:
        labs = vision_lab(lut.rgb8[:lut.n])
        where = lut.edges[1:-1]
        for vision, ls in styles.items():
            d = delta_e_2000(labs[vision][:-1], labs[vision][1:])
            ax.plot(where, d, ls, marker="o", ms=3.5, color=INK, lw=1.1, label=vision, zorder=3)
        ax.axhspan(lim.class_separation, 1e3, color=ui.BAND.hex, lw=0, zorder=0.8)
        ax.axhline(lim.class_separation, color=ui.ACCENT.hex, lw=0.9, ls="--", zorder=1,
                   label=f"adjacent classes ≥ {lim.class_separation:g} ΔE00")
        top = max(float(np.nanmax([delta_e_2000(labs[v][:-1], labs[v][1:]) for v in styles])) * 1.2,
                  lim.class_separation * 1.5)
        ax.set_title("ΔE00 between adjacent classes (at their shared edge)", fontsize=7.5, color=MUTED,
                     loc="left", pad=2)
    else:
        lo, hi = ramp.domain
        v = np.linspace(lo, hi, ORDER_SAMPLES)
        labs = vision_lab(to_rgb8(ramp.colors_at(v)))
        mid = (v[:-1] + v[1:]) / 2
        top = 0.0
        for vision, ls in styles.items():
            d = delta_e_2000(labs[vision][:-1], labs[vision][1:])
            ax.plot(mid, d, ls, marker="o", ms=3, color=INK, lw=1.1, label=vision, zorder=3)
            top = max(top, float(np.nanmax(d)))
        top *= 1.25
        ax.set_title(f"ΔE00 between colours 1/{ORDER_SAMPLES - 1} of the domain apart",
                     fontsize=7.5, color=MUTED, loc="left", pad=2)
    if ramp.kind == "threshold" and metrics.break_de00 is not None:
        ax.plot([ramp.at], [metrics.break_de00], marker="D", ms=5, color=INK, zorder=4, clip_on=False)
        ax.annotate(f"across the break {metrics.break_de00:.1f}", (ramp.at, metrics.break_de00),
                    fontsize=6.5, color=INK, xytext=(-8, 0), textcoords="offset points", va="center",
                    ha="right")
        ax.plot([ramp.at], [lim.break_de00], marker="_", ms=14, mew=1.5, color=ui.ACCENT.hex, zorder=4)
        ax.annotate(f"at least {lim.break_de00:g}", (ramp.at, lim.break_de00), fontsize=6.5,
                    color=ui.ACCENT.hex, xytext=(-8, 0), textcoords="offset points", va="center",
                    ha="right")
        top = max(top, metrics.break_de00 * 1.15, lim.break_de00 * 1.3)
    ax.set_ylim(0, max(top, 5.0))
    ax.legend(fontsize=6.5, frameon=True, framealpha=0.92, edgecolor="none", loc="upper left", ncol=4)
