"""The colours of compose's own interface: the HTML review page, its plots, the legend's furniture
and the ramp figure. Every one is our own choice in CIE LCh(ab) (D65), stated here once with its
purpose; the sRGB hex is derived from it (rounded to 8 bits), never written by hand elsewhere.

Design (our own; checked in ``tests/color/test_interface.py``):

* text on its background reaches WCAG 2 contrast >= 4.5:1 (WCAG 2.2 SC 1.4.3), and lines and
  marks that carry a verdict reach >= 3:1 on white (SC 1.4.11) -- :data:`TEXT_PAIRS`,
  :data:`GRAPHIC_PAIRS`;
* pass and fail differ along the blue-yellow axis (a teal against a brick red), not only along
  red-green, so they stay apart in deutan and protan simulation; and a verdict is never told by
  colour alone: every verdict also carries a word or a mark (:data:`MARKS`);
* neutrals are true greys (C* = 0) except the warm page surround and the legend's key patch.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from compose.color.lab import lch_to_srgb

__all__ = ["Swatch", "SWATCHES", "TEXT_PAIRS", "GRAPHIC_PAIRS", "MARKS", "TEXT_CONTRAST",
           "GRAPHIC_CONTRAST", "css_variables", "verdict_color", "verdict_mark",
           "INK", "MUTED", "RULE", "PAPER", "SURROUND", "PANEL", "GRID",
           "FAIL", "FAIL_BG", "FAIL_EDGE", "FAIL_ROW", "FAIL_LIGHT",
           "PASS", "PASS_BG", "PASS_EDGE", "PASS_LIGHT",
           "WARN", "WARN_BG", "WARN_EDGE", "ACCENT", "ACCENT_BG", "ACCENT_EDGE", "BAND",
           "CAUTION_EDGE", "CAUTION_BG", "SHADE", "KEY_PATCH", "FRAME", "DOT_EDGE", "BAR_EDGE"]

TEXT_CONTRAST = 4.5      # WCAG 2.2 SC 1.4.3 (contrast, minimum), body text
GRAPHIC_CONTRAST = 3.0   # WCAG 2.2 SC 1.4.11 (non-text contrast), lines and marks


@dataclass(frozen=True)
class Swatch:
    """One interface colour: CIELAB L* in [0, 100], C*ab >= 0, hue h in degrees, its purpose."""

    name: str
    L: float
    C: float
    h: float
    purpose: str

    @property
    def rgb(self) -> tuple[float, float, float]:
        """sRGB in [0, 1], rounded to 8-bit codes (what a page or a PNG shows)."""
        rgb = np.clip(lch_to_srgb(np.array([self.L, self.C, self.h], dtype=float)), 0.0, 1.0)
        return tuple(float(v) for v in np.round(rgb * 255.0) / 255.0)  # type: ignore[return-value]

    @property
    def hex(self) -> str:
        """``#rrggbb`` of :attr:`rgb`."""
        return "#" + "".join(f"{round(v * 255):02x}" for v in self.rgb)

    def __str__(self) -> str:
        return self.hex


# neutrals
INK = Swatch("ink", 15, 0, 0, "body text, axis labels and ticks")
MUTED = Swatch("muted", 44, 0, 0, "secondary text: captions, notes, units")
RULE = Swatch("rule", 88, 0, 0, "hairlines between sections, table rows, image frames")
PAPER = Swatch("paper", 100, 0, 0, "the page and plot background")
SURROUND = Swatch("surround", 96.5, 1.5, 95, "around the page column on a wide screen")
PANEL = Swatch("panel", 98.2, 0, 0, "table heads and code blocks")
GRID = Swatch("grid", 93.5, 0, 0, "plot grid lines")
SHADE = Swatch("shade", 64, 0, 0, "plot shading of what is reserved (drawn translucent)")
FRAME = Swatch("frame", 52, 0, 0, "frames of legend colour bars and swatches")
DOT_EDGE = Swatch("dot-edge", 57, 0, 0, "edges of colour dots in plots")
BAR_EDGE = Swatch("bar-edge", 46, 0, 0, "edges of the grey histogram bars")
KEY_PATCH = Swatch("key-patch", 84, 2.5, 90, "behind overlay samples in the legend (light halos show)")
# verdicts: fail a brick red, pass a teal; both differ in b* so deutan/protan readers see them apart
FAIL = Swatch("fail", 40, 60, 35, "text and marks of a failed rule")
FAIL_BG = Swatch("fail-bg", 95.5, 5, 35, "behind a failed verdict")
FAIL_EDGE = Swatch("fail-edge", 80, 22, 35, "border of a failed verdict")
FAIL_ROW = Swatch("fail-row", 98.5, 1.5, 35, "table row of a failed rule")
FAIL_LIGHT = Swatch("fail-light", 70, 34, 35, "histogram bars that fall short of a limit")
PASS = Swatch("pass", 42, 26, 195, "text and marks of a passed rule")
PASS_BG = Swatch("pass-bg", 95.5, 6, 195, "behind a passed verdict")
PASS_EDGE = Swatch("pass-edge", 80, 16, 195, "border of a passed verdict")
PASS_LIGHT = Swatch("pass-light", 72, 22, 195, "histogram bars that reach a limit")
WARN = Swatch("warn", 42, 44, 70, "text of a warning (a draft or waived rule)")
WARN_BG = Swatch("warn-bg", 95.5, 12, 85, "behind a warning")
WARN_EDGE = Swatch("warn-edge", 83, 34, 80, "border of a warning")
CAUTION_EDGE = Swatch("caution-edge", 62, 58, 68, "border of the caution sentence")
CAUTION_BG = Swatch("caution-bg", 97, 7, 85, "behind the caution sentence")
# accent: links, tags, budgets drawn in plots
ACCENT = Swatch("accent", 36, 27, 255, "links, tags, budget lines and boxes in plots")
ACCENT_BG = Swatch("accent-bg", 95, 3.5, 255, "behind a tag")
ACCENT_EDGE = Swatch("accent-edge", 86, 9, 255, "border of a tag")
BAND = Swatch("band", 90, 10, 255, "a budget's allowed band, shaded in plots")

SWATCHES: tuple[Swatch, ...] = (
    INK, MUTED, RULE, PAPER, SURROUND, PANEL, GRID, SHADE, FRAME, DOT_EDGE, BAR_EDGE, KEY_PATCH,
    FAIL, FAIL_BG, FAIL_EDGE, FAIL_ROW, FAIL_LIGHT, PASS, PASS_BG, PASS_EDGE, PASS_LIGHT,
    WARN, WARN_BG, WARN_EDGE, CAUTION_EDGE, CAUTION_BG, ACCENT, ACCENT_BG, ACCENT_EDGE, BAND)

#: (text, background, where): every pair of text and the background it is set on.
TEXT_PAIRS: tuple[tuple[Swatch, Swatch, str], ...] = (
    (INK, PAPER, "body text"),
    (INK, PANEL, "table heads, code"),
    (INK, CAUTION_BG, "the caution sentence"),
    (INK, FAIL_ROW, "a failed rule's row"),
    (INK, PASS_BG, "lists inside a passed verdict"),
    (INK, FAIL_BG, "lists inside a failed verdict"),
    (MUTED, PAPER, "captions and notes"),
    (MUTED, PANEL, "notes in table heads"),
    (MUTED, GRID, "plot text over a grid line"),
    (MUTED, FAIL_ROW, "messages in a failed rule's row"),
    (FAIL, FAIL_BG, "failed verdict"),
    (FAIL, FAIL_ROW, "verdict badge text in a failed row"),
    (FAIL, PAPER, "plot titles of a failed layer"),
    (PASS, PASS_BG, "passed verdict"),
    (PASS, PAPER, "plot titles of a passed layer"),
    (WARN, WARN_BG, "warning"),
    (ACCENT, PAPER, "links, budget labels in plots"),
    (ACCENT, ACCENT_BG, "tags"),
)

#: (mark, background, what): lines and marks that carry meaning, WCAG non-text contrast.
GRAPHIC_PAIRS: tuple[tuple[Swatch, Swatch, str], ...] = (
    (FAIL, PAPER, "a failed layer's measured box in plots"),
    (PASS, PAPER, "a passed layer's measured box in plots"),
    (ACCENT, PAPER, "budget lines in plots"),
    (ACCENT, BAND, "budget edge over its shaded band"),
    (FRAME, PAPER, "legend bar frames"),
    (INK, KEY_PATCH, "legend text beside the key patch"),
)

#: A verdict is told by a mark and a word as well as by colour.
MARKS = {"pass": "\u2713", "fail": "\u2717", "warn": "!", "none": "\u2013"}


def verdict_color(passed: bool | None) -> Swatch:
    """PASS, FAIL, or MUTED when nothing was judged."""
    return MUTED if passed is None else (PASS if passed else FAIL)


def verdict_mark(passed: bool | None) -> str:
    """``"✓ pass"``, ``"✗ fail"`` or ``"– not judged"``: a verdict in a mark and a word."""
    if passed is None:
        return f"{MARKS['none']} not judged"
    return f"{MARKS['pass']} pass" if passed else f"{MARKS['fail']} fail"


def css_variables() -> str:
    """The swatches as CSS custom properties: ``--ink: #262626; --fail-bg: ...;``."""
    return " ".join(f"--{s.name}: {s.hex};" for s in SWATCHES)
