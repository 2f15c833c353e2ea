"""The ramp figure (``compose ramp NAME --plot FILE``): what compose judges in a ramp, drawn
against the limits it judges by.

Continuous and stepped ramps, top to bottom, all sharing one data axis:

* the ramp as drawn (and its twins), each with its out-of-domain squares as in the legend, then
  proofs of the same strip: grey of the same CIELAB L*, deutan and protan simulation (Machado
  et al. 2009, severity 100) -- the visions the checker judges;
* **lightness** L* against the data value, with the tolerance bands of the rules that bound it
  (a twin's L* around its base, a diverging arm's L* around the mirrored other arm, the L*
  continuity at a threshold break) and any reversal of direction shaded as failing;
* **chroma** C*ab, with the style's theme chroma budget shaded (p50 at least its minimum, p95
  at most its maximum -- judged on the map's pixels; here the ramp's own p50 and p95 over an
  evenly spread domain are marked), the neutral-midpoint limit of a diverging ramp and the sRGB
  limit at each L* and hue;
* **evenness**: each CAM02-UCS step between adjacent samples as a percentage of the mean step,
  with the band the evenness limit allows (coefficient of variation <= limit, drawn as +- limit);
* **difference**: CIEDE2000 between neighbouring colours in normal, deutan and protan vision
  (a sixteenth of the domain apart, or adjacent classes of a stepped ramp), with the
  separation limit where a rule applies and the break difference of a threshold ramp.

Beside each panel the checker's own rule results for it (:func:`compose.ramps.rule_checks`),
each with a mark and a word as well as a colour. Qualitative ramps: :mod:`.figure_classes`.
Interface colours come from :mod:`compose.color.interface`; matplotlib's object interface only;
written through a temporary file renamed into place.
"""
from __future__ import annotations

import os
import tempfile
import textwrap
from pathlib import Path

import numpy as np

from compose.color import interface as ui
from compose.ramps.figure_classes import PROOF_VISIONS, check_color, check_lines, classes_figure, hex8, proof, swatch
from compose.ramps.figure_panels import (
    chroma_panel,
    difference_panel,
    evenness_panel,
    lightness_panel,
    profile,
    style_axes,
)
from compose.ramps.lut import lut_for
from compose.ramps.metrics import RampLimits, RampMetrics, ramp_metrics, rule_checks
from compose.ramps.model import Ramp

__all__ = ["ramp_figure", "write_ramp_plot", "panel_of"]

INK, MUTED, GRID = ui.INK.hex, ui.MUTED.hex, ui.GRID.hex

WIDTH = 10.0                 # inches
LEFT, MAIN, CARDS = 1.05, 5.85, 2.9    # left margin, panel width, rule column (inches)
WRAP = 48                    # characters per line in the rule column
END_FRACTION = 0.035         # room for an out-of-domain square at each end, fraction of the domain

#: Which panel shows which rule: words in the rule id (first match wins; the rest go below).
_PANELS = (("nodata", ("nodata",)),
           ("lightness", ("monotone", "gray", "symmetry", "twin-lightness", "threshold-lightness",
                          "break-continuity")),
           ("chroma", ("chroma", "midpoint")),
           ("evenness", ("uniformity", "evenness")),
           ("difference", ("separation", "break-visible")))


def panel_of(rule: str) -> str:
    """The panel a rule id belongs to: nodata, lightness, chroma, evenness, difference, or other."""
    for panel, words in _PANELS:
        if any(w in rule for w in words):
            return panel
    return "other"


class _Stack:
    """Rows stacked from the top of a figure of fixed width; heights and gaps in inches."""

    def __init__(self, fig, height: float):
        self.fig, self.height, self.y = fig, height, 0.0

    def row(self, h: float, gap: float = 0.0, left: float = LEFT, width: float = MAIN, **kw):
        self.y += gap
        rect = (left / WIDTH, 1 - (self.y + h) / self.height, width / WIDTH, h / self.height)
        self.y += h
        return self.fig.add_axes(rect, **kw)

    def cards(self, ax, checks, extra: tuple[str, ...] = ()) -> None:
        """The rule results beside panel ``ax``: a mark and a word, the id, the message."""
        x = (LEFT + MAIN + 0.25) / WIDTH
        y = ax.get_position().y1
        step = 0.118 / self.height
        for note in extra:
            for line in textwrap.wrap(note, WRAP, subsequent_indent="    "):
                self.fig.text(x, y, line, fontsize=7, color=MUTED, va="top")
                y -= step
        for c in checks:
            for i, line in enumerate(check_lines(c, WRAP - 4)):
                self.fig.text(x, y, line, fontsize=7.2 if i == 0 else 6.8, va="top",
                              color=check_color(c) if i == 0 else MUTED,
                              weight="bold" if i == 0 else "normal")
                y -= step


def _strip(ax, rgb: np.ndarray, lo: float, hi: float, label: str, ends=None) -> None:
    """A colour strip over [lo, hi]; ``ends`` (low rgb, high rgb) as squares set off by a gap."""
    ax.imshow(rgb[None, :, :], extent=(lo, hi, 0, 1), aspect="auto", interpolation="nearest", zorder=1)
    ax.axis("off")
    ax.set_ylim(0, 1)
    ax.text(lo - (hi - lo) * (END_FRACTION + 0.012), 0.5, label, ha="right", va="center",
            fontsize=8, color=INK)
    if ends is not None:
        e, w = (hi - lo) * END_FRACTION, (hi - lo) * END_FRACTION * 0.62
        ax.add_patch(swatch((lo - e, 0), w, 1, ends[0], lw=0.4, zorder=2, clip_on=False))
        ax.add_patch(swatch((hi + e - w, 0), w, 1, ends[1], lw=0.4, zorder=2, clip_on=False))


def _continuous(fig, ramp: Ramp, members, units, m: RampMetrics, checks, lim, theme, height) -> None:
    lo, hi = ramp.domain
    x = np.linspace(lo, hi, 600)
    span = hi - lo
    xlim = (lo - span * END_FRACTION, hi + span * END_FRACTION)
    stack = _Stack(fig, height)
    stack.y = 0.85
    drawn, lch = {}, {}
    strip_axes = []
    for r in members:
        lut = lut_for(r)
        drawn[r.name] = lut.rgb8[lut.index(np.linspace(r.domain[0], r.domain[1], 600))] / 255.0
        lch[r.name] = profile(r, x, drawn[r.name])
        ax = stack.row(0.3, 0.06)
        _strip(ax, drawn[r.name], lo, hi, r.name, ends=(r.outside_low, r.outside_high))
        ax.set_xlim(*xlim)
        strip_axes.append(ax)
    by_panel: dict[str, list] = {}
    for c in checks:
        by_panel.setdefault(panel_of(c.rule), []).append(c)
    nodata = [f"nodata {hex8(np.rint(np.array(ramp.nodata) * 255))}, outside low / high "
              f"{hex8(np.rint(np.array(ramp.outside_low) * 255))} / "
              f"{hex8(np.rint(np.array(ramp.outside_high) * 255))}"]
    stack.cards(strip_axes[0], by_panel.pop("nodata", []), tuple(nodata))
    fig.add_artist(swatch(((LEFT + MAIN + 0.05) / WIDTH, strip_axes[0].get_position().y1 - 0.15 / height),
                          0.14 / WIDTH, 0.14 / height, ramp.nodata))
    stack.y += 0.08
    for label, kind in PROOF_VISIONS:
        ax = stack.row(0.2, 0.035)
        _strip(ax, proof(drawn[ramp.name], kind), lo, hi, label)
        ax.set_xlim(*xlim)
        strip_axes.append(ax)
    panels = []
    titles = (("lightness", "lightness L*\n(CIELAB)", 1.55), ("chroma", "chroma C*ab", 1.55),
              ("evenness", "CAM02-UCS step\n% of the mean", 1.3), ("difference", "ΔE00 (CIEDE2000)", 1.3))
    for key, ylabel, h in titles:
        ax = stack.row(h, 0.32)
        style_axes(ax, ylabel)
        ax.set_xlim(*xlim)
        panels.append((key, ax))
    axes = dict(panels)
    lightness_panel(axes["lightness"], ramp, members, x, lch, lim)
    notes = chroma_panel(axes["chroma"], ramp, members, x, lch, lim, theme)
    evenness_panel(axes["evenness"], ramp, lim)
    difference_panel(axes["difference"], ramp, lim, m)
    rho = f"grey order: |Spearman ρ| of value vs L* {abs(m.grayscale_rho):.3f}" if m.grayscale_rho is not None else ""
    extra = {"lightness": (rho,) if rho else (), "chroma": tuple(notes),
             "evenness": (f"CV {m.step_cv:.1f} % at 16 equal data steps" if m.step_cv is not None else "",)}
    for key, ax in panels:
        stack.cards(ax, by_panel.pop(key, []), tuple(t for t in extra.get(key, ()) if t))
    last = axes["difference"]
    last.tick_params(labelbottom=True)
    last.set_xlabel(f"data value ({units})" if units else "data value", fontsize=9, color=INK)
    marks = [(ramp.center, f"centre {ramp.center:g}")] if ramp.center is not None else []
    if ramp.at is not None:
        marks.append((ramp.at, f"break {ramp.at:g}"))
    lut = lut_for(ramp)
    for _key, ax in panels:
        if lut.stepped:
            for e in lut.edges[1:-1]:
                ax.axvline(e, color=ui.RULE.hex, lw=0.6, zorder=0.6)
        for value, _ in marks:
            ax.axvline(value, color=MUTED, lw=0.8, ls=(0, (3, 2)), zorder=0.7)
    for value, text in marks:
        strip_axes[0].text(value, 1.12, text, transform=strip_axes[0].get_xaxis_transform(),
                           ha="center", va="bottom", fontsize=7.5, color=INK)
    rest = by_panel.pop("other", []) + [c for v in by_panel.values() for c in v]
    y = 0.42 / height
    for c in rest:
        fig.text(LEFT / WIDTH, y, check_lines(c, 200)[0], fontsize=7.2, color=check_color(c), va="top")
        y -= 0.13 / height
    for w in m.warnings:
        fig.text(LEFT / WIDTH, y, f"{ui.MARKS['warn']} {w}", fontsize=7.2, color=ui.WARN.hex, va="top")
        y -= 0.13 / height


def _verdict(checks) -> tuple[str, str]:
    bad = [c for c in checks if not c.passed and c.level != "warning"]
    warn = [c for c in checks if not c.passed and c.level == "warning"]
    if bad:
        text = f"{ui.MARKS['fail']} {len(bad)} of {len(checks)} ramp rules fail"
        return text + (f", {len(warn)} warning(s)" if warn else ""), ui.FAIL.hex
    text = f"{ui.MARKS['pass']} all {len(checks)} ramp rules pass"
    return text + (f", {len(warn)} warning(s)" if warn else ""), ui.PASS.hex


def ramp_figure(ramp: Ramp, others: dict[str, Ramp] | None = None, units: str | None = None,
                limits: RampLimits | None = None, budgets=None):
    """A matplotlib Figure of ``ramp`` (see the module docstring). ``others`` (name -> Ramp)
    supplies its twins; ``limits`` the ramp rules' limits (default :class:`RampLimits`);
    ``budgets`` a style's budgets (its ``theme`` chroma budget is drawn when given)."""
    from matplotlib.figure import Figure

    others = others or {}
    lim = limits or RampLimits()
    m = ramp_metrics(ramp)
    checks = rule_checks(m, lim)
    members = [ramp] + [others[n] for n in ramp.matched if n != ramp.name and n in others]
    if ramp.kind == "qualitative":
        fig = Figure(figsize=(WIDTH, 7.4), dpi=150, facecolor=ui.PAPER.hex)
        classes_figure(fig, ramp, m, checks, lim.class_separation)
        subtitle = f"qualitative, {len(ramp.classes)} classes"
    else:
        n_rest = sum(1 for c in checks if panel_of(c.rule) == "other") + len(m.warnings)
        height = 0.85 + 0.36 * len(members) + 0.08 + 0.235 * 3 + 4 * 0.32 + 2 * 1.55 + 2 * 1.3 + 0.75 \
            + 0.13 * n_rest
        fig = Figure(figsize=(WIDTH, height), dpi=150, facecolor=ui.PAPER.hex)
        _continuous(fig, ramp, members, units, m, checks, lim, getattr(budgets, "theme", None), height)
        space = "CAM02-UCS" if ramp.space == "cam02ucs" else "CIELAB"
        subtitle = f"{ramp.kind}, interpolated in {space}, domain {ramp.domain[0]:g} to {ramp.domain[1]:g}"
        if ramp.twin_of:
            subtitle += f", twin of {ramp.twin_of} (hue {ramp.hue[0]:g}° to {ramp.hue[1]:g}°)"
        if ramp.stepped:
            subtitle += f", {lut_for(ramp).n} classes"
    h = fig.get_figheight()
    fig.text(0.02, 1 - 0.12 / h, ramp.name, ha="left", va="top", fontsize=13, color=INK, weight="bold")
    fig.text(0.02, 1 - 0.42 / h, subtitle, fontsize=8.5, color=MUTED, va="top")
    verdict, color = _verdict(checks)
    fig.text(0.98, 1 - 0.14 / h, verdict, fontsize=10, color=color, ha="right", va="top", weight="bold")
    return fig


def write_ramp_plot(ramp: Ramp, path: Path | str, others: dict[str, Ramp] | None = None,
                    units: str | None = None, limits: RampLimits | None = None, budgets=None) -> Path:
    """Render :func:`ramp_figure` to a PNG at ``path``, through a temporary file renamed into
    place; dated as the render's outputs are (:func:`compose.page.dates.dated_png`: a tIME chunk
    of ``SOURCE_DATE_EPOCH`` when it is set, no date otherwise), so the same ramp gives the same
    bytes."""
    import io

    from compose.page.dates import dated_png

    path = Path(path)
    fig = ramp_figure(ramp, others, units, limits, budgets)
    buf = io.BytesIO()
    fig.savefig(buf, format="png", facecolor=ui.PAPER.hex)
    data = dated_png(buf.getvalue())
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".png", dir=path.parent or ".")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)   # mkstemp makes 0600; give the file the usual mode
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path
