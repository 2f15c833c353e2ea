"""Pieces of the ramp figure shared by both layouts, and the layout for qualitative ramps.

Qualitative ramps: one swatch per class in normal vision, deutan and protan simulation
(Machado et al. 2009, severity 100) and in grey of the same L*; the smallest CIEDE2000 per
vision against the class-separation limit; the pairwise differences (the smallest over normal,
deutan and protan vision) as a table with the pairs under the limit marked; the checker's own
rule results, each with a mark and a word as well as a colour. Interface colours come from
:mod:`compose.color.interface`.
"""
from __future__ import annotations

import textwrap

import numpy as np

from compose.color import interface as ui
from compose.color.cvd import simulate_cvd
from compose.color.difference import delta_e_2000
from compose.color.lab import lab_to_srgb, srgb_to_lab
from compose.ramps.metrics import RampMetrics, RuleCheck, vision_lab
from compose.ramps.model import Ramp

__all__ = ["gray_of", "check_color", "check_mark", "check_lines", "swatch", "hex8",
           "classes_figure", "PROOF_VISIONS"]

#: The proofs the figure shows: those the checker judges (deutan, protan) and grey by L*.
PROOF_VISIONS = (("gray L*", None), ("deutan", "deutan"), ("protan", "protan"))


def gray_of(rgb: np.ndarray) -> np.ndarray:
    """sRGB (..., 3) -> greys of the same CIELAB L* (the grayscale proof by lightness)."""
    lab = srgb_to_lab(np.asarray(rgb, dtype=float))
    lab[..., 1:] = 0.0
    return np.clip(lab_to_srgb(lab), 0, 1)


def proof(rgb: np.ndarray, kind: str | None) -> np.ndarray:
    """``rgb`` as a dichromat of ``kind`` sees it (severity 100), or in grey when ``kind`` is None."""
    return gray_of(rgb) if kind is None else simulate_cvd(rgb, kind, 100.0)


__all__.append("proof")


def check_color(c: RuleCheck) -> str:
    """Hex of a rule result: pass, fail, or warn for a failed warning-level rule."""
    if c.passed:
        return ui.PASS.hex
    return ui.WARN.hex if c.level == "warning" else ui.FAIL.hex


def check_mark(c: RuleCheck) -> str:
    """``"✓ pass"``, ``"✗ fail"`` or ``"! warn"``: never colour alone."""
    if c.passed:
        return f"{ui.MARKS['pass']} pass"
    return f"{ui.MARKS['warn']} warn" if c.level == "warning" else f"{ui.MARKS['fail']} fail"


def check_lines(c: RuleCheck, width: int = 40) -> list[str]:
    """The rule result as short lines: mark, word and rule id, then the checker's own message
    (without the ramp name and the trailing verdict), wrapped to ``width`` characters."""
    text = c.message.split(": ", 1)[-1]
    text = text.rsplit(" (", 1)[0] if text.endswith(")") and text.rsplit(" (", 1)[-1] in (
        "ok)", "fails)", "warning)") else text
    return [f"{check_mark(c)}  {c.rule}"] + ["    " + t for t in textwrap.wrap(text, width)]


def swatch(xy, w: float, h: float, rgb, **kw):
    """A framed colour rectangle (matplotlib patch)."""
    from matplotlib.patches import Rectangle
    kw.setdefault("edgecolor", ui.FRAME.hex)
    kw.setdefault("lw", 0.5)
    return Rectangle(xy, w, h, facecolor=tuple(np.clip(np.asarray(rgb, float), 0, 1)), **kw)


def hex8(code) -> str:
    """``#rrggbb`` of an 8-bit triple."""
    return "#{:02x}{:02x}{:02x}".format(*tuple(int(c) for c in code))


def _text_on(L: float) -> str:
    """Paper-coloured text on dark swatches, ink on light ones (L* 55 splits them)."""
    return ui.PAPER.hex if L < 55 else ui.INK.hex


def classes_figure(fig, ramp: Ramp, m: RampMetrics, checks: list[RuleCheck], separation: float) -> None:
    """Draw the qualitative layout into ``fig`` (see the module docstring)."""
    ink, muted = ui.INK.hex, ui.MUTED.hex
    classes = ramp.classes
    n = len(classes)
    rgb8 = np.array([np.rint(np.array(c.rgb) * 255) for c in classes]).astype(np.uint8)
    rgb = rgb8 / 255.0
    rows = [("normal", rgb)] + [(label, proof(rgb, kind)) for label, kind in PROOF_VISIONS[1:]]
    rows.append(("gray L*", gray_of(rgb)))
    ax = fig.add_axes((0.1, 0.4, 0.72, 0.47))
    ax.set_xlim(0, n)
    ax.set_ylim(len(rows), -1.45)
    ax.axis("off")
    lab = srgb_to_lab(rgb)
    for r, (name, colors) in enumerate(rows):
        ax.text(-0.08, r + 0.45, name, ha="right", va="center", fontsize=8.5, color=ink)
        for i in range(n):
            ax.add_patch(swatch((i + 0.05, r + 0.05), 0.9, 0.8, colors[i]))
        key = name if name in (m.min_pair_de00 or {}) else None
        if key:
            labs = srgb_to_lab(colors)
            d = delta_e_2000(labs[:, None], labs[None])
            d[np.diag_indices(n)] = np.inf
            a, b = np.unravel_index(np.argmin(d), d.shape)
            v = m.min_pair_de00[key]
            ok = v >= separation
            mark = ui.MARKS["pass" if ok else "fail"]
            ax.text(n + 0.12, r + 0.45, f"{mark} min ΔE00 {v:.1f}\n({classes[a].value:g} vs "
                    f"{classes[b].value:g}; limit {separation:g})", va="center", fontsize=7.5,
                    color=ui.PASS.hex if ok else ui.FAIL.hex)
    for i, c in enumerate(classes):
        L = lab[i, 0]
        ax.text(i + 0.5, 0.36, f"{c.value:g}", ha="center", va="center", fontsize=9,
                color=_text_on(L), weight="bold")
        ax.text(i + 0.5, 0.68, hex8(rgb8[i]), ha="center", va="center", fontsize=6.5, color=_text_on(L))
        gl = len(rows) - 1
        ax.text(i + 0.5, gl + 0.45, f"L* {L:.0f}", ha="center", va="center", fontsize=7, color=_text_on(L))
        ax.text(i + 0.5, -0.05, "\n".join(textwrap.wrap(c.label, 13)), ha="center", va="bottom",
                fontsize=7.5, color=ink)
    fams: dict = {}
    for i, c in enumerate(classes):
        if c.family:
            fams.setdefault(c.family, []).append(i)
    for fam, idx in fams.items():
        ax.plot([min(idx) + 0.1, max(idx) + 0.9], [-0.95, -0.95], color=ink, lw=1)
        ax.text((min(idx) + max(idx) + 1) / 2, -1.0, fam, ha="center", va="bottom", fontsize=7.5,
                color=ink, style="italic")
    # pairwise table: the smallest dE00 over normal, deutan and protan vision
    labs = vision_lab(rgb8)
    d = np.min([delta_e_2000(labs[v][:, None], labs[v][None]) for v in ("normal", "deutan", "protan")], axis=0)
    t = fig.add_axes((0.1, 0.05, 0.34, 0.27))
    t.set_xlim(-0.2, n)
    t.set_ylim(n + 0.6, 0)
    t.axis("off")
    t.set_title(f"pairwise ΔE00, smallest of normal, deutan, protan\n(✗ and shaded: below {separation:g})",
                fontsize=8, color=ink, loc="left")
    for i in range(n):
        t.text(-0.1, i + 0.5, f"{classes[i].value:g}", ha="right", va="center", fontsize=7.5, color=ink)
        t.text(i + 0.5, n + 0.1, f"{classes[i].value:g}", ha="center", va="top", fontsize=7.5, color=ink)
        for j in range(i):
            low = d[i, j] < separation
            t.add_patch(swatch((j + 0.04, i + 0.04), 0.92, 0.92,
                               ui.FAIL_BG.rgb if low else ui.PANEL.rgb, edgecolor=ui.PAPER.hex))
            t.text(j + 0.5, i + 0.5, f"{'✗' if low else ''}{d[i, j]:.0f}", ha="center", va="center",
                   fontsize=7, color=ui.FAIL.hex if low else ink)
    y = 0.33
    fig.add_artist(swatch((0.5, y - 0.012), 0.022, 0.018, ramp.nodata))
    fig.text(0.53, y, f"nodata {hex8(np.rint(np.array(ramp.nodata) * 255))}: {m.nodata_min_de00:.1f} ΔE00 "
             f"from the nearest class, C* {m.nodata_chroma:.1f}", fontsize=7.5, color=ink, va="center")
    y -= 0.03
    for fam, within in (m.family_min_pair_de00 or {}).items():
        fig.text(0.5, y, f"within {fam}: min ΔE00 " + ", ".join(f"{k} {v:.1f}" for k, v in within.items()),
                 fontsize=7.5, color=muted, va="center")
        y -= 0.025
    for w in m.warnings:
        fig.text(0.5, y, f"{ui.MARKS['warn']} {w}", fontsize=7.5, color=ui.WARN.hex, va="center")
        y -= 0.025
    y -= 0.01
    for c in checks:
        fig.text(0.5, y, check_lines(c, 200)[0], fontsize=7.5, color=check_color(c), va="center")
        y -= 0.022
