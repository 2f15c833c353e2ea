"""A figure of a ramp for the cartographer: swatches, L* / C* / hue profiles, CVD and grey proofs.

Continuous and stepped ramps: the drawn strip (with its twins, if any), lightness, chroma (with
the sRGB chroma limit at that L* and hue) and hue against the data value, then the strip as seen
under deutan, protan and tritan simulation (Machado et al. 2009, severity 100) and in grey by L*.
Qualitative ramps: one swatch per class in each vision, the smallest CIEDE2000 per vision, and
the pairwise differences (the smallest over normal, deutan and protan vision) as a table.
Uses matplotlib's object interface only (no pyplot state); written through a temporary file.
"""
from __future__ import annotations

import os
import tempfile
import textwrap
from pathlib import Path

import numpy as np

from compose.color.cvd import simulate_cvd
from compose.color.difference import delta_e_2000
from compose.color.gamut import max_chroma
from compose.color.lab import lab_to_lch, lab_to_srgb, srgb_to_lab
from compose.ramps.lut import lut_for
from compose.ramps.metrics import VISIONS, RampMetrics, ramp_metrics, rule_checks, vision_lab
from compose.ramps.model import Ramp

__all__ = ["ramp_figure", "write_ramp_plot"]

INK = "#2b2b2b"
FAINT = "#9a9a9a"
FAIL = "#f2c9a7"
_PROOFS = (("deutan", "deutan"), ("protan", "protan"), ("tritan", "tritan"), ("grey L*", None))


def _gray(lab: np.ndarray) -> np.ndarray:
    """sRGB greys with the L* of ``lab`` (..., 3): the grayscale proof by lightness."""
    g = np.zeros_like(lab)
    g[..., 0] = lab[..., 0]
    return np.clip(lab_to_srgb(g), 0, 1)


def _proof(rgb: np.ndarray, kind: str | None) -> np.ndarray:
    if kind is None:
        return _gray(srgb_to_lab(rgb))
    return simulate_cvd(rgb, kind, 100.0)


def _strip(ax, rgb: np.ndarray, lo: float, hi: float, label: str) -> None:
    ax.imshow(rgb[None, :, :], extent=(lo, hi, 0, 1), aspect="auto", interpolation="nearest")
    ax.set_yticks([])
    ax.set_ylabel(label, rotation=0, ha="right", va="center", fontsize=8.5, color=INK)
    for side in ("top", "right", "left"):
        ax.spines[side].set_visible(False)
    ax.tick_params(axis="x", labelbottom=False, length=0)


def _profile(ramp: Ramp, x: np.ndarray, drawn: np.ndarray) -> np.ndarray:
    """LCh along ``x``: the unrounded ramp (smooth lines), or the drawn classes of a stepped ramp;
    NaN across a threshold break so no line joins the two sides."""
    if ramp.stepped:
        lch = lab_to_lch(srgb_to_lab(drawn))
    else:
        lch = lab_to_lch(ramp.lab_at(x))
    if ramp.at is not None:
        k = int(np.searchsorted(x, ramp.at))
        if 0 < k < len(x):
            lch[k - 1] = np.nan
    return lch


def _hue_line(lch: np.ndarray) -> np.ndarray:
    """Hue in degrees where C* >= 3 (NaN elsewhere), unwrapped within each unbroken run and
    shifted so each run's mean lies in [0, 360)."""
    hue = np.where(lch[:, 1] >= 3, lch[:, 2], np.nan)
    ok = ~np.isnan(hue)
    starts = np.flatnonzero(ok & ~np.concatenate([[False], ok[:-1]]))
    for a in starts:
        b = a
        while b < len(hue) and ok[b]:
            b += 1
        run = np.degrees(np.unwrap(np.radians(hue[a:b])))
        hue[a:b] = run - 360.0 * np.floor(run.mean() / 360.0)
    return hue


def _summary(m: RampMetrics) -> str:
    parts = [f"L* {m.lightness_range[0]:.0f}–{m.lightness_range[1]:.0f}",
             f"C* {m.chroma_range[0]:.0f}–{m.chroma_range[1]:.0f}"]
    if m.step_cv is not None:
        parts.append(f"step CV {m.step_cv:.1f} %")
    if m.gamut_removed_max > 0.05:
        parts.append(f"gamut cut C* max {m.gamut_removed_max:.1f}")
    if m.matched_removed_max > 0.05:
        parts.append(f"twin cut C* max {m.matched_removed_max:.1f} / mean {m.matched_removed_mean:.1f}")
    parts.append(f"nodata {m.nodata_min_de00:.1f} ΔE00 off the ramp")
    return "   ·   ".join(parts)


def _verdicts(checks) -> str:
    bad = [c for c in checks if not c.passed]
    if not bad:
        return f"all {len(checks)} ramp rules pass"
    return "fails: " + "; ".join(c.rule.removeprefix("ramp.") for c in bad)


def _continuous_figure(fig, ramp: Ramp, members: list[Ramp], units: str | None) -> None:
    lo, hi = ramp.domain
    x = np.linspace(lo, hi, 600)
    gs = fig.add_gridspec(len(members) + 3 + len(_PROOFS), 2, width_ratios=[12, 1.3],
                          height_ratios=[0.55] * len(members) + [1.7, 1.2, 1.0] + [0.32] * len(_PROOFS),
                          hspace=0.16, wspace=0.04, left=0.13, right=0.97, top=0.895, bottom=0.115)
    axes = []
    drawn = {}
    for i, r in enumerate(members):
        lut = lut_for(r)
        rgb8 = lut.rgb8[lut.index(np.linspace(r.domain[0], r.domain[1], 600))]
        drawn[r.name] = rgb8 / 255.0
        ax = fig.add_subplot(gs[i, 0])
        _strip(ax, drawn[r.name], lo, hi, r.name)
        ax.set_xlim(lo, hi)
        axes.append(ax)
    side = fig.add_subplot(gs[0:len(members), 1])
    side.axis("off")
    for j, (label, rgb) in enumerate((("outside low", ramp.outside_low), ("outside high", ramp.outside_high), ("nodata", ramp.nodata))):
        y = 0.8 - j * 0.33
        side.add_patch(_rect((0.0, y - 0.11), 0.32, 0.22, rgb))
        side.text(0.42, y, label, fontsize=7.5, va="center", color=INK)
    side.set_xlim(0, 1)
    side.set_ylim(0, 1)

    panels = [fig.add_subplot(gs[len(members) + k, 0], sharex=axes[0]) for k in range(3)]
    styles = ["-", "--", ":", "-."]
    limits = []
    for r, ls in zip(members, styles):
        lch = _profile(r, x, drawn[r.name])
        w = 1.8 if r is ramp else 1.2
        label = r.name if r is ramp else f"{r.name} (same L*, C*)"
        panels[0].plot(x, lch[:, 0], ls, color=INK, lw=w, label=label)
        panels[1].plot(x, lch[:, 1], ls, color=INK, lw=w)
        panels[2].plot(x, _hue_line(lch), ls, color=INK, lw=w)
        limits.append(np.where(lch[:, 1] >= 3, max_chroma(lch[:, 0], np.nan_to_num(lch[:, 2]) % 360), np.nan))
    text = "sRGB limit at this L*, h" + (" (tightest of the twins)" if len(members) > 1 else "")
    panels[1].plot(x, np.min(limits, axis=0), color=FAINT, lw=0.9, label=text)
    panels[0].set_ylabel("lightness\nL* (CIELAB)", fontsize=8.5)
    panels[0].set_ylim(0, 100)
    panels[1].set_ylabel("chroma\nC*ab", fontsize=8.5)
    panels[1].set_ylim(0, None)
    panels[2].set_ylabel("hue h (°)\nwhere C* ≥ 3", fontsize=8.5)
    from matplotlib.ticker import FuncFormatter
    panels[2].yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v % 360:.0f}"))
    legend = {"fontsize": 7, "frameon": True, "framealpha": 0.9, "edgecolor": "none", "loc": "best"}
    if len(members) > 1:
        panels[0].legend(ncol=len(members), **legend)
    panels[1].legend(**legend)
    for p in panels:
        p.grid(True, color="#e4e4e4", lw=0.6)
        p.tick_params(labelsize=7.5, labelbottom=False)
        for s in ("top", "right"):
            p.spines[s].set_visible(False)
    proofs = []
    for k, (label, kind) in enumerate(_PROOFS):
        ax = fig.add_subplot(gs[len(members) + 3 + k, 0], sharex=axes[0])
        _strip(ax, _proof(drawn[ramp.name], kind), lo, hi, label)
        proofs.append(ax)
    proofs[-1].tick_params(axis="x", labelbottom=True, length=3, labelsize=8)
    proofs[-1].set_xlabel(f"data value ({units})" if units else "data value", fontsize=9)
    marks = [(ramp.center, f"centre {ramp.center:g}")] if ramp.center is not None else []
    if ramp.at is not None:
        marks.append((ramp.at, f"break {ramp.at:g}"))
    lut = lut_for(ramp)
    if lut.stepped:
        for e in lut.edges[1:-1]:
            for p in panels:
                p.axvline(e, color="#d0d0d0", lw=0.6, zorder=0)
    for value, text in marks:
        for ax in axes + panels + proofs:
            ax.axvline(value, color=INK, lw=0.8, ls=(0, (3, 2)))
        axes[0].text(value, 1.08, text, transform=axes[0].get_xaxis_transform(), ha="center",
                     va="bottom", fontsize=8, color=INK)


def _rect(xy, w, h, rgb):
    from matplotlib.patches import Rectangle
    return Rectangle(xy, w, h, facecolor=tuple(np.clip(rgb, 0, 1)), edgecolor="#bdbdbd", lw=0.5)


def _qualitative_figure(fig, ramp: Ramp, m: RampMetrics, checks) -> None:
    classes = ramp.classes
    n = len(classes)
    rgb8 = np.array([np.rint(np.array(c.rgb) * 255) for c in classes]).astype(np.uint8)
    rgb = rgb8 / 255.0
    rows = [("normal", rgb)] + [(v, simulate_cvd(rgb, v, 100.0)) for v in VISIONS[1:]]
    rows.append(("grey L*", _gray(srgb_to_lab(rgb))))
    ax = fig.add_axes((0.1, 0.36, 0.74, 0.55))
    ax.set_xlim(0, n)
    ax.set_ylim(len(rows), -1.45)
    ax.axis("off")
    lab = srgb_to_lab(rgb)
    for r, (name, colors) in enumerate(rows):
        ax.text(-0.08, r + 0.45, name, ha="right", va="center", fontsize=8.5, color=INK)
        for i in range(n):
            ax.add_patch(_rect((i + 0.05, r + 0.05), 0.9, 0.8, colors[i]))
        if name in m.min_pair_de00:
            labs = srgb_to_lab(colors)
            d = delta_e_2000(labs[:, None], labs[None])
            d[np.diag_indices(n)] = np.inf
            a, b = np.unravel_index(np.argmin(d), d.shape)
            v = m.min_pair_de00[name]
            ax.text(n + 0.12, r + 0.45, f"min ΔE00 {v:.1f}\n({classes[a].value:g} vs {classes[b].value:g})",
                    va="center", fontsize=7.5, color=INK if v >= 10 else "#a04000")
    for i, c in enumerate(classes):
        L = lab[i, 0]
        ink = "white" if L < 55 else INK
        ax.text(i + 0.5, 0.36, f"{c.value:g}", ha="center", va="center", fontsize=9, color=ink, weight="bold")
        ax.text(i + 0.5, 0.68, _hex(rgb8[i]), ha="center", va="center", fontsize=6.5, color=ink)
        ax.text(i + 0.5, len(rows) - 0.55, f"L* {L:.0f}", ha="center", va="center", fontsize=7, color=ink)
        ax.text(i + 0.5, -0.05, "\n".join(textwrap.wrap(c.label, 13)), ha="center", va="bottom",
                fontsize=7.5, color=INK)
    fams: dict = {}
    for i, c in enumerate(classes):
        if c.family:
            fams.setdefault(c.family, []).append(i)
    for fam, idx in fams.items():
        ax.plot([min(idx) + 0.1, max(idx) + 0.9], [-0.95, -0.95], color=INK, lw=1)
        ax.text((min(idx) + max(idx) + 1) / 2, -1.0, fam, ha="center", va="bottom", fontsize=7.5,
                color=INK, style="italic")
    # pairwise table: the smallest dE00 over normal, deutan and protan vision
    labs = vision_lab(rgb8)
    d = np.min([delta_e_2000(labs[v][:, None], labs[v][None]) for v in ("normal", "deutan", "protan")], axis=0)
    t = fig.add_axes((0.1, 0.06, 0.36, 0.24))
    t.set_xlim(-0.2, n)
    t.set_ylim(n + 0.6, 0)
    t.axis("off")
    t.set_title("pairwise ΔE00, smallest of normal, deutan, protan\n(shaded: below 10)", fontsize=8,
                color=INK, loc="left")
    for i in range(n):
        t.text(-0.1, i + 0.5, f"{classes[i].value:g}", ha="right", va="center", fontsize=7.5, color=INK)
        t.text(i + 0.5, n + 0.1, f"{classes[i].value:g}", ha="center", va="top", fontsize=7.5, color=INK)
        for j in range(i):
            t.add_patch(_rect((j + 0.04, i + 0.04), 0.92, 0.92, (1, 1, 1)))
            t.patches[-1].set_facecolor(FAIL if d[i, j] < 10 else "#f1f1f1")
            t.patches[-1].set_edgecolor("white")
            t.text(j + 0.5, i + 0.5, f"{d[i, j]:.0f}", ha="center", va="center", fontsize=7, color=INK)
    lines = [f"nodata {_hex(np.rint(np.array(ramp.nodata) * 255).astype(int))}: "
             f"{m.nodata_min_de00:.1f} ΔE00 from the nearest class, C* {m.nodata_chroma:.1f}"]
    for fam, within in (m.family_min_pair_de00 or {}).items():
        lines.append(f"within {fam}: min ΔE00 " + ", ".join(f"{k} {v:.1f}" for k, v in within.items()))
    lines += [f"warning: {w}" for w in m.warnings]
    lines.append("")
    lines += [("ok     " if c.passed else ("warn   " if c.level == "warning" else "FAIL   ")) + c.rule
              for c in checks]
    fig.text(0.555, 0.28, "\n".join(lines), fontsize=7.5, color=INK, va="top", linespacing=1.5)
    fig.add_artist(_rect((0.528, 0.2635), 0.02, 0.0165, ramp.nodata))


def _hex(code) -> str:
    return "#%02x%02x%02x" % tuple(int(c) for c in code)


def ramp_figure(ramp: Ramp, others: dict[str, Ramp] | None = None, units: str | None = None,
                limits=None):
    """A matplotlib Figure describing ``ramp``; ``others`` (name -> Ramp) supplies its twins."""
    from matplotlib.figure import Figure

    others = others or {}
    m = ramp_metrics(ramp)
    checks = rule_checks(m) if limits is None else rule_checks(m, limits)
    members = [ramp] + [others[n] for n in ramp.matched if n != ramp.name and n in others]
    if ramp.kind == "qualitative":
        fig = Figure(figsize=(10, 7.4), dpi=150)
        _qualitative_figure(fig, ramp, m, checks)
        subtitle = f"qualitative, {len(ramp.classes)} classes"
    else:
        fig = Figure(figsize=(10, 8.6 + 0.45 * (len(members) - 1)), dpi=150)
        _continuous_figure(fig, ramp, members, units)
        subtitle = f"{ramp.kind}, interpolated in {'CAM02-UCS' if ramp.space == 'cam02ucs' else 'CIELAB'}, " \
                   f"domain {ramp.domain[0]:g} to {ramp.domain[1]:g}"
        if ramp.twin_of:
            subtitle += f", twin of {ramp.twin_of} (hue {ramp.hue[0]:g}° to {ramp.hue[1]:g}°)"
        if ramp.stepped:
            subtitle += f", {lut_for(ramp).n} classes"
    fig.suptitle(f"{ramp.name}", x=0.02, ha="left", y=0.985, fontsize=13, color=INK, weight="bold")
    fig.text(0.02, 0.945, subtitle, fontsize=9, color=INK)
    if ramp.kind != "qualitative":
        fig.text(0.02, 0.045, _summary(m), fontsize=8, color=INK)
    bad = any(not c.passed and c.level == "error" for c in checks)
    if ramp.kind != "qualitative":
        fig.text(0.02, 0.018, _verdicts(checks), fontsize=8, color="#a04000" if bad else INK)
    return fig


def write_ramp_plot(ramp: Ramp, path: Path | str, others: dict[str, Ramp] | None = None,
                    units: str | None = None, limits=None) -> Path:
    """Render :func:`ramp_figure` to a PNG at ``path``, through a temporary file renamed into place.

    ``limits``: :class:`~compose.ramps.RampLimits` of the style's budgets (default the defaults)."""
    path = Path(path)
    fig = ramp_figure(ramp, others, units, limits)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".png", dir=path.parent or ".")
    try:
        with os.fdopen(fd, "wb") as fh:
            fig.savefig(fh, format="png")
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)   # mkstemp makes 0600; give the file the usual mode
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path
