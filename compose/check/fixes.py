"""Numeric fixes: the colour or number a style needs so that a failed rule passes.

Every solver evaluates its candidates the way the map will draw them (8-bit colours, the same
lookup tables, the measured pixel weights), so applying the suggested value makes the rule pass
on a re-render of the same data. Candidates keep hue (and chroma where sRGB allows) and move
lightness or chroma only.
"""
from __future__ import annotations

import numpy as np

from compose.check.stats import N_LIGHTNESS, weighted_percentiles
from compose.color.difference import delta_e_2000
from compose.color.gamut import map_to_gamut
from compose.color.lab import lab_to_xyz, lch_to_srgb, srgb_to_lab, srgb_to_lch
from compose.color.parse import to_hex, to_rgb8
from compose.color.srgb import srgb_to_linear
from compose.color.wcag import WCAG_Y

__all__ = ["lch_rgb8", "hex8", "luminance8", "lightness_of_y", "bin_luminance",
           "contrast_share_estimate", "solve_contrast_lightness", "halo_color",
           "relief_stats", "solve_relief_chroma", "solve_relief_lightness", "solve_relief_spread",
           "stretch_weights", "solve_nodata",
           "solve_class_pair"]

_GRID = np.round(np.arange(0.0, 100.0001, 0.1), 1)   # L* candidates in steps of 0.1


def lch_rgb8(lch) -> np.ndarray:
    """CIE LCh(ab) (..., 3) -> 8-bit sRGB (..., 3), lowering chroma only where sRGB cannot show it."""
    mapped, _ = map_to_gamut(np.asarray(lch, dtype=float))
    return to_rgb8(np.clip(lch_to_srgb(mapped), 0.0, 1.0))


def hex8(rgb8) -> str:
    """``'#rrggbb'`` of an 8-bit colour (3,)."""
    return to_hex(np.asarray(rgb8, dtype=float) / 255.0)


def luminance8(rgb8) -> np.ndarray:
    """WCAG relative luminance (= CIE Y, 0-1) of 8-bit colours (..., 3)."""
    return srgb_to_linear(np.asarray(rgb8, dtype=float) / 255.0) @ WCAG_Y


def lightness_of_y(y) -> np.ndarray:
    """CIELAB L* of luminance Y (0-1, white 1)."""
    y = np.asarray(y, dtype=float)
    xyz = np.stack([np.zeros_like(y), y, np.zeros_like(y)], axis=-1)
    from compose.color.lab import xyz_to_lab
    return xyz_to_lab(xyz)[..., 0]


def _y_of_lightness(L) -> np.ndarray:
    L = np.asarray(L, dtype=float)
    return lab_to_xyz(np.stack([L, np.zeros_like(L), np.zeros_like(L)], axis=-1))[..., 1]


def bin_luminance() -> tuple[np.ndarray, np.ndarray]:
    """(Y at the low edge, Y at the high edge) of each L* bin of width 1 (centres 0..100)."""
    centres = np.arange(N_LIGHTNESS, dtype=float)
    return (_y_of_lightness(np.clip(centres - 0.5, 0, 100)),
            _y_of_lightness(np.clip(centres + 0.5, 0, 100)))


def contrast_share_estimate(y_fig: np.ndarray, beneath_hist: np.ndarray, limit: float) -> np.ndarray:
    """Share (0-1) of an L* histogram of what lies beneath that surely reaches WCAG ``limit``
    against figures of luminance ``y_fig`` (k,) -> (k,).

    A bin counts only when every L* inside it reaches the limit (conservative, never above the
    share measured pixel by pixel).
    """
    y_lo, y_hi = bin_luminance()
    yf = np.asarray(y_fig, dtype=float)[:, None]
    darker = (y_lo[None, :] + 0.05) >= limit * (yf + 0.05)     # figure darker than the bin
    lighter = (yf + 0.05) >= limit * (y_hi[None, :] + 0.05)    # figure lighter than the bin
    ok = darker | lighter
    w = np.asarray(beneath_hist, dtype=float)
    total = w.sum()
    return (ok * w[None, :]).sum(axis=1) / total if total > 0 else np.full(yf.shape[0], np.nan)


def solve_contrast_lightness(rgb, beneath_hist, limit: float, share: float
                             ) -> tuple[np.ndarray | None, np.ndarray | None]:
    """8-bit colours of the figure's hue and chroma, nearest in L* to ``rgb`` (floats 0-1) on
    the dark and on the light side, whose contrast share against ``beneath_hist`` is >= ``share``.

    Returns (darker rgb8 or None, lighter rgb8 or None).
    """
    L, C, h = srgb_to_lch(np.asarray(rgb, dtype=float))
    cand = lch_rgb8(np.stack([_GRID, np.full_like(_GRID, C), np.full_like(_GRID, h)], axis=-1))
    ok = contrast_share_estimate(luminance8(cand), beneath_hist, limit) >= share
    dark = np.nonzero(ok & (_GRID <= L))[0]
    light = np.nonzero(ok & (_GRID >= L))[0]
    return (cand[dark[-1]] if dark.size else None, cand[light[0]] if light.size else None)


def halo_color(rgb, limit: float) -> np.ndarray | None:
    """A neutral halo (8-bit) with WCAG contrast >= ``limit`` against the figure ``rgb``:
    light when the figure can have a light one (the usual choice), else dark; None if neither."""
    y = float(luminance8(to_rgb8(rgb)))
    need_light = limit * (y + 0.05) - 0.05
    need_dark = (y + 0.05) / limit - 0.05
    for target, step in ((need_light, 1.0), (need_dark, -1.0)):
        if not 0.0 <= target <= 1.0:
            continue
        L = float(np.clip(lightness_of_y(target) + step, 0.0, 100.0))
        for _ in range(30):
            gray = lch_rgb8(np.array([L, 0.0, 0.0]))
            y_h = float(luminance8(gray))
            ratio = (max(y, y_h) + 0.05) / (min(y, y_h) + 0.05)
            if ratio >= limit:
                return gray
            L = float(np.clip(L + step, 0.0, 100.0))
    return None


# --- relief (ground) ------------------------------------------------------------------------

def _hex_rgb(lch) -> tuple[float, float, float]:
    """An LCh colour as the 8-bit sRGB it becomes once written as '#rrggbb' and parsed back."""
    return tuple(float(v) for v in lch_rgb8(np.asarray(lch, dtype=float)) / 255.0)


def relief_stats(options, weights, tint=None, shadow=None, strength=None) -> tuple[float, float, float]:
    """(L* p5, L* p95, C* p95) of a relief drawn with the given colours / strength and the
    measured shade weights (one per lookup-table level, see :mod:`compose.layers.relief`)."""
    from compose.ramps.relief import relief_colors

    rgb8, _ = relief_colors(options.tint if tint is None else tint,
                            options.shadow if shadow is None else shadow,
                            options.strength if strength is None else strength, options.altitude)
    rgb8 = np.vstack([rgb8, [[0, 0, 0]]])          # the layer's no-data entry, as it draws it
    lch = srgb_to_lch(rgb8 / 255.0)
    w = np.asarray(weights, dtype=float)
    p5, _, p95 = weighted_percentiles(lch[:, 0], w)
    _, _, c95 = weighted_percentiles(lch[:, 1], w)
    return p5, p95, c95


def _default_shadow_used(options) -> bool:
    from compose.ramps.relief import default_shadow
    return bool(np.allclose(options.shadow, default_shadow(options.tint), atol=1e-9))


def _candidate(options, tint_lch, shadow_scale: float | None):
    """Tint (and shadow) as written back to the style: the default shadow follows the tint."""
    from compose.ramps.relief import default_shadow
    tint = _hex_rgb(tint_lch)
    if _default_shadow_used(options):
        return tint, default_shadow(tint), None
    if shadow_scale is None:
        return tint, options.shadow, None
    L, C, h = srgb_to_lch(np.asarray(options.shadow, dtype=float))
    shadow = _hex_rgb([L, C * shadow_scale, h])
    return tint, shadow, shadow


def solve_relief_chroma(options, weights, target: float) -> dict | None:
    """Lower the tint's chroma (and a stated shadow's, by the same factor) until C* p95 <= target.

    Returns {"tint": rgb, "shadow": rgb or None, "c95": new p95} or None when even grey fails.
    """
    L, C, h = srgb_to_lch(np.asarray(options.tint, dtype=float))
    lo, hi = 0.0, 1.0
    best = None
    for _ in range(24):
        k = (lo + hi) / 2
        tint, shadow, stated = _candidate(options, [L, C * k, h], k)
        c95 = relief_stats(options, weights, tint, shadow)[2]
        if c95 <= target:
            lo, best = k, {"tint": tint, "shadow": stated, "c95": c95}
        else:
            hi = k
    if best is None:
        tint, shadow, stated = _candidate(options, [L, 0.0, h], 0.0)
        c95 = relief_stats(options, weights, tint, shadow)[2]
        if c95 > target:
            return None
        best = {"tint": tint, "shadow": stated, "c95": c95}
    return best


def solve_relief_lightness(options, weights, lo_L: float, hi_L: float, margin: float = 0.3
                           ) -> dict | None:
    """Bring the relief's L* p5..p95 inside [lo_L, hi_L].

    Too light (p95 high): lower the tint's L* (a default shadow follows). Too dark (p5 low):
    lower ``strength`` (how far shade pulls toward the shadow), rounded down to 0.01; if even 0
    is too dark, raise the tint's L*. Returns {"tint": rgb | None, "strength": float | None,
    "p5", "p95"} or None.
    """
    p5, p95, _ = relief_stats(options, weights)
    L, C, h = srgb_to_lch(np.asarray(options.tint, dtype=float))

    def ok(stats_):
        return stats_[0] >= lo_L + margin and stats_[1] <= hi_L - margin

    if p5 < lo_L and p95 <= hi_L:
        s_lo, s_hi, best = 0.0, float(options.strength), None
        for _ in range(20):
            s = np.floor((s_lo + s_hi) / 2 * 100) / 100
            st = relief_stats(options, weights, strength=s)
            if ok(st):
                s_lo, best = s, {"tint": None, "strength": float(s), "p5": st[0], "p95": st[1]}
            else:
                s_hi = s
            if s_hi - s_lo <= 0.01:
                break
        if best is not None:
            return best
    # move the tint's lightness: down when too light, up when too dark
    direction = -1.0 if p95 > hi_L else 1.0
    for step in np.arange(0.2, 100.0, 0.2):
        Lt = L + direction * step
        if not 0.0 <= Lt <= 100.0:
            break
        tint, shadow, _ = _candidate(options, [Lt, C, h], None)
        st = relief_stats(options, weights, tint, shadow)
        if ok(st):
            return {"tint": tint, "strength": None, "p5": st[0], "p95": st[1]}
    return None


def stretch_weights(weights, altitude: float, k: float) -> np.ndarray:
    """Shade-level weights (one per relief lookup-table level, plus no-data) as they would be
    with every shade's distance from flat ground multiplied by ``k`` (clipped to 0..1): the
    first-order effect of multiplying the exaggeration by ``k`` (exact for gentle slopes, where
    shade - sin(altitude) grows linearly with the gradient)."""
    w = np.asarray(weights, dtype=float)
    n = w.size - 1                                   # the last entry is no-data
    s = np.linspace(0.0, 1.0, n)
    flat = np.sin(np.radians(altitude))
    new = np.clip(flat + k * (s - flat), 0.0, 1.0)
    idx = np.rint(new * (n - 1)).astype(int)
    out = np.bincount(idx, weights=w[:n], minlength=n)
    return np.append(out, w[n:])


def solve_relief_spread(options, weights, spread: float, lo_L: float, margin: float = 0.3,
                        hi_L: float = 100.0) -> dict | None:
    """Make a relief's L* spread (p95 - p5) reach ``spread`` while its p5 stays >= ``lo_L`` (and
    its p95 <= ``hi_L``).

    First raise ``strength`` (exact: the same shade levels through a new lookup table), in steps
    of 0.01 up to 1; if that is not enough, raise the exaggeration by the smallest factor (up
    to 100x, in steps of about 1 %) that reaches it at the strength the lightness budget allows
    (estimated with :func:`stretch_weights`); if the tint is too dark to leave room for shading
    above ``lo_L``, raise the tint's L* (hue and chroma kept; a default shadow follows) by the
    least whole unit with which some strength reaches the spread, first at the current
    exaggeration, then at larger ones. Returns {"strength", "exaggeration" (None if unchanged),
    "tint" (None if unchanged), "spread", "p5"} or None.
    """
    def stats(w, strength, tint=None, shadow=None):
        p5, p95, _ = relief_stats(options, w, tint, shadow, strength=strength)
        return p95 - p5, p5, p95

    need = spread + margin
    s0 = float(options.strength)
    best_s = s0
    for st in np.round(np.arange(s0, 1.0 + 1e-9, 0.01), 2):
        sp, p5, _ = stats(weights, float(st))
        if p5 < lo_L + margin:
            break
        best_s = float(st)
        if sp >= need:
            return {"strength": float(st), "exaggeration": None, "tint": None, "spread": sp,
                    "p5": p5}
    ex0 = float(options.exaggeration)
    for k in np.unique(np.round(np.geomspace(1.1, 100.0, 400), 2)):
        w = stretch_weights(weights, options.altitude, float(k))
        sp, p5, _ = stats(w, best_s)
        if sp >= need and p5 >= lo_L + margin:
            return {"strength": best_s, "exaggeration": float(np.ceil(ex0 * k * 10) / 10),
                    "tint": None, "spread": sp, "p5": p5}
    return _lighter_tint(options, weights, need, lo_L + margin, hi_L - margin, stats)


def _lighter_tint(options, weights, need: float, lo: float, hi: float, stats) -> dict | None:
    """The third step of :func:`solve_relief_spread`: a lighter tint and the least strength."""
    L, C, h = (float(v) for v in srgb_to_lch(np.asarray(options.tint, dtype=float)))
    s0 = float(options.strength)
    grid = np.round(np.arange(s0, 1.0 + 1e-9, 0.01), 2)
    ex0 = float(options.exaggeration)
    for k in (1.0, 1.5, 2.0, 3.0, 5.0, 10.0, 20.0, 50.0, 100.0):
        w = weights if k == 1.0 else stretch_weights(weights, options.altitude, k)
        top = _candidate(options, [hi, C, h], None)
        if stats(w, 1.0, top[0], top[1])[0] < need:     # not even the lightest tint at full strength
            continue
        for Lt in np.arange(np.floor(L) + 1.0, hi + 1e-9, 1.0):
            tint, shadow, _ = _candidate(options, [Lt, C, h], None)
            if stats(w, 1.0, tint, shadow)[0] < need:
                continue
            i, j = 0, grid.size - 1                      # the least strength reaching the spread
            while i < j:
                m = (i + j) // 2
                if stats(w, float(grid[m]), tint, shadow)[0] >= need:
                    j = m
                else:
                    i = m + 1
            sp, p5, p95 = stats(w, float(grid[i]), tint, shadow)
            if sp >= need and p5 >= lo and p95 <= hi:
                return {"strength": float(grid[i]), "tint": tint, "spread": sp, "p5": p5,
                        "exaggeration": None if k == 1.0 else float(np.ceil(ex0 * k * 10) / 10)}
    return None


# --- no-data --------------------------------------------------------------------------------

def solve_nodata(current8, ramp8: np.ndarray, background, chroma_max: float, separation: float
                 ) -> np.ndarray | None:
    """An 8-bit no-data colour nearest in L* to ``current8`` with C* <= ``chroma_max`` (the
    current hue) and >= ``separation`` dE00 from every ramp colour and from the background
    (or equal to the background). None when no lightness works."""
    L, C, h = srgb_to_lch(np.asarray(current8, dtype=float) / 255.0)
    c = min(C, max(0.0, chroma_max - 0.5))
    grid = _GRID[::5]                                            # L* in steps of 0.5
    order = grid[np.argsort(np.abs(grid - L), kind="stable")]
    ramp_lab = srgb_to_lab(np.unique(np.asarray(ramp8, dtype=np.uint8), axis=0) / 255.0)
    bg_lab = srgb_to_lab(np.asarray(background, dtype=float))
    for start in range(0, order.size, 16):                       # nearest candidates first
        Ls = order[start:start + 16]
        cand = lch_rgb8(np.stack([Ls, np.full_like(Ls, c), np.full_like(Ls, h)], axis=-1))
        lab = srgb_to_lab(cand / 255.0)
        d_ramp = delta_e_2000(lab[:, None, :], ramp_lab[None, :, :]).min(axis=1)
        d_bg = delta_e_2000(lab, bg_lab)
        chroma = srgb_to_lch(cand / 255.0)[:, 1]
        good = ((d_ramp >= separation) & ((d_bg >= separation) | (d_bg < 0.5))
                & (chroma <= chroma_max))
        if good.any():
            return cand[int(np.argmax(good))]
    return None


# --- classes --------------------------------------------------------------------------------

def solve_class_pair(rgb8: np.ndarray, pair: tuple[int, int], limits: np.ndarray,
                     labs_of) -> tuple[int, np.ndarray] | None:
    """Move one colour of the closest pair in L* (its hue and chroma kept) until every pairwise
    dE00 involving it reaches its limit in every simulated vision.

    rgb8 (n, 3) class colours; limits (n, n) pairwise dE00 limits; ``labs_of(rgb8 (k, 3)) ->
    (visions, k, 3)`` CIELAB under each vision. Returns (index moved, new rgb8) with the
    smallest lightness change, or None.
    """
    labs = labs_of(rgb8)
    best = None
    for i in pair:
        L, C, h = srgb_to_lch(rgb8[i] / 255.0)
        for sign in (-1.0, 1.0):
            Ls = L + sign * np.arange(0.5, 60.0, 0.5)
            Ls = Ls[(Ls >= 0) & (Ls <= 100)]
            if Ls.size == 0:
                continue
            cand = lch_rgb8(np.stack([Ls, np.full_like(Ls, C), np.full_like(Ls, h)], axis=-1))
            cl = labs_of(cand)                                   # (v, k, 3)
            others = np.delete(np.arange(len(rgb8)), i)
            d = delta_e_2000(cl[:, :, None, :], labs[:, None, others, :])   # (v, k, n-1)
            ok = np.all(d >= limits[i, others][None, None, :], axis=(0, 2))
            hit = np.nonzero(ok)[0]
            if hit.size and (best is None or abs(Ls[hit[0]] - L) < best[0]):
                best = (abs(Ls[hit[0]] - L), i, cand[hit[0]])
    return None if best is None else (best[1], best[2])
