"""A small SVG plotting helper for the review page: axes with linear or log scales, rectangles,
lines, dots and text, written as SVG text (no plotting library, a few milliseconds per plot).

Coordinates given to :class:`Axes` methods are data units; the figure is in CSS pixels.
"""
from __future__ import annotations

import base64
import html
import math
from collections.abc import Iterable, Sequence

from compose.color import interface as ui

__all__ = ["Figure", "Axes", "nice_ticks", "svg_uri", "MIN_TEXT_PX", "PLOT_W"]

FONT = "DejaVu Sans, Helvetica, Arial, sans-serif"
#: the smallest text drawn (CSS px at the figure's own size; common practice, no source: screen
#: text under about 9 px is hard to read); smaller sizes asked for are drawn at this one
MIN_TEXT_PX = 9.0
#: the review page's plots' width (CSS px): the page never shows them narrower (html_css)
PLOT_W = 420


def _f(v: float) -> str:
    return f"{v:.1f}"


def _text(x: float, y: float, s: str, size: float, color: str, anchor: str = "start",
          weight: str = "normal", rotate: bool = False) -> str:
    rot = f' transform="rotate(-90 {_f(x)} {_f(y)})"' if rotate else ""
    bold = ' font-weight="bold"' if weight == "bold" else ""
    size = max(float(size), MIN_TEXT_PX)
    return (f'<text x="{_f(x)}" y="{_f(y)}" font-size="{size:g}" fill="{color}" '
            f'text-anchor="{anchor}"{bold}{rot}>{html.escape(s)}</text>')


class Figure:
    """An SVG canvas of ``width`` x ``height`` CSS pixels on ``background``."""

    def __init__(self, width: float, height: float, background: str = ui.PAPER.hex):
        self.width, self.height = width, height
        self.items: list[str] = [f'<rect width="{_f(width)}" height="{_f(height)}" '
                                 f'fill="{background}"/>']
        self.n_axes = 0         # numbers the axes' clip paths: the same text on every run

    def text(self, x: float, y: float, s: str, size: float = 11, color: str = ui.INK.hex,
             anchor: str = "start", weight: str = "normal") -> None:
        """Text with its baseline at pixel (x, y)."""
        self.items.append(_text(x, y, s, size, color, anchor, weight))

    def axes(self, x0: float, y0: float, x1: float, y1: float, xlim: tuple[float, float],
             ylim: tuple[float, float], xlog: bool = False) -> Axes:
        """Axes in the pixel box (x0, y0)-(x1, y1) (y0 at the top) showing ``xlim`` x ``ylim``."""
        return Axes(self, (x0, y0, x1, y1), xlim, ylim, xlog)

    def svg(self) -> str:
        return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{_f(self.width)}" '
                f'height="{_f(self.height)}" viewBox="0 0 {_f(self.width)} {_f(self.height)}" '
                f'font-family="{FONT}">' + "".join(self.items) + "</svg>")


class Axes:
    """Data -> pixel mapping inside a box of a :class:`Figure`, with drawing helpers."""

    def __init__(self, fig: Figure, box, xlim, ylim, xlog: bool):
        self.fig, self.box, self.xlim, self.ylim, self.xlog = fig, box, xlim, ylim, xlog
        x0, y0, x1, y1 = box
        fig.n_axes += 1
        fig.items.append(f'<clipPath id="c{fig.n_axes}"><rect x="{_f(x0)}" y="{_f(y0)}" '
                         f'width="{_f(x1 - x0)}" height="{_f(y1 - y0)}"/></clipPath>')
        self._clip = f'clip-path="url(#c{fig.n_axes})"'

    def x(self, v: float) -> float:
        lo, hi = self.xlim
        if self.xlog:
            v, lo, hi = math.log(max(v, 1e-12)), math.log(lo), math.log(hi)
        return self.box[0] + (v - lo) / (hi - lo) * (self.box[2] - self.box[0])

    def y(self, v: float) -> float:
        lo, hi = self.ylim
        return self.box[3] - (v - lo) / (hi - lo) * (self.box[3] - self.box[1])

    def _add(self, item: str) -> None:
        self.fig.items.append(item)

    def rect(self, x0: float, y0: float, x1: float, y1: float, fill: str = "none",
             stroke: str = "none", width: float = 1.0, opacity: float = 1.0,
             dash: str | None = None) -> None:
        """A rectangle between data corners (x0, y0) and (x1, y1), clipped to the axes."""
        px0, px1 = sorted((self.x(x0), self.x(x1)))
        py0, py1 = sorted((self.y(y0), self.y(y1)))
        d = f' stroke-dasharray="{dash}"' if dash else ""
        self._add(f'<rect x="{_f(px0)}" y="{_f(py0)}" width="{_f(px1 - px0)}" '
                  f'height="{_f(py1 - py0)}" fill="{fill}" opacity="{opacity:g}" '
                  f'stroke="{stroke}" stroke-width="{width:g}"{d} {self._clip}/>')

    def bars(self, left: Iterable[float], right: Iterable[float], height: Iterable[float],
             colors: Iterable[str], edge: str = "none", width: float = 0.4) -> None:
        """Bars from 0 to ``height`` between ``left`` and ``right`` (data x)."""
        for a, b, h, c in zip(left, right, height, colors):
            if h > 0:
                self.rect(a, 0.0, b, h, fill=c, stroke=edge, width=width)

    def vline(self, v: float, color: str, width: float = 1.0, dash: str | None = None) -> None:
        d = f' stroke-dasharray="{dash}"' if dash else ""
        x = self.x(v)
        self._add(f'<line x1="{_f(x)}" y1="{_f(self.box[1])}" x2="{_f(x)}" y2="{_f(self.box[3])}" '
                  f'stroke="{color}" stroke-width="{width:g}"{d}/>')

    def polyline(self, xs: Iterable[float], ys: Iterable[float], color: str,
                 width: float = 1.0) -> None:
        pts = " ".join(f"{_f(self.x(a))},{_f(self.y(b))}" for a, b in zip(xs, ys))
        self._add(f'<polyline points="{pts}" fill="none" stroke="{color}" '
                  f'stroke-width="{width:g}" {self._clip}/>')

    def dot(self, x: float, y: float, r: float, fill: str, edge: str = "none",
            width: float = 0.4) -> None:
        self._add(f'<circle cx="{_f(self.x(x))}" cy="{_f(self.y(y))}" r="{r:.2f}" fill="{fill}" '
                  f'stroke="{edge}" stroke-width="{width:g}" {self._clip}/>')

    def marker(self, x: float, y: float, size: float, color: str, filled: bool = True) -> None:
        """An upward triangle (not clipped: it may sit on the axis)."""
        px, py = self.x(x), self.y(y)
        pts = f"{_f(px)},{_f(py - size)} {_f(px - size)},{_f(py + size * 0.7)} {_f(px + size)},{_f(py + size * 0.7)}"
        fill = color if filled else ui.PAPER.hex
        self._add(f'<polygon points="{pts}" fill="{fill}" stroke="{color}" stroke-width="1.2"/>')

    def text(self, x: float, y: float, s: str, size: float = 10, color: str = ui.INK.hex,
             anchor: str = "start", dy: float = 0.0) -> None:
        self._add(_text(self.x(x), self.y(y) + dy, s, size, color, anchor))

    def frame(self, xticks: Sequence[float], yticks: Sequence[float], xlabel: str, ylabel: str,
              ink: str, grid: str, size: float = 10) -> None:
        """Grid lines, the left and bottom axis lines, tick labels and axis labels."""
        x0, y0, x1, y1 = self.box
        for t in xticks:
            x = self.x(t)
            self._add(f'<line x1="{_f(x)}" y1="{_f(y0)}" x2="{_f(x)}" y2="{_f(y1)}" '
                      f'stroke="{grid}" stroke-width="0.8"/>')
            self._add(_text(x, y1 + size + 3, f"{t:g}", size * 0.9, ink, "middle"))
        for t in yticks:
            y = self.y(t)
            self._add(f'<line x1="{_f(x0)}" y1="{_f(y)}" x2="{_f(x1)}" y2="{_f(y)}" '
                      f'stroke="{grid}" stroke-width="0.8"/>')
            self._add(_text(x0 - 4, y + size * 0.35, f"{t:g}", size * 0.9, ink, "end"))
        self._add(f'<polyline points="{_f(x0)},{_f(y0)} {_f(x0)},{_f(y1)} {_f(x1)},{_f(y1)}" '
                  f'fill="none" stroke="{ink}" stroke-width="1"/>')
        self._add(_text((x0 + x1) / 2, y1 + 2 * size + 6, xlabel, size, ink, "middle"))
        self._add(_text(x0 - 3.2 * size, (y0 + y1) / 2, ylabel, size, ink, "middle", rotate=True))


def nice_ticks(lo: float, hi: float, n: int = 5) -> list[float]:
    """About ``n`` round tick values (1, 2, 2.5, 5 x 10^k steps) within [lo, hi]."""
    span = max(hi - lo, 1e-12)
    raw = span / max(n, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = min((m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw), default=10 * mag)
    first = math.ceil(lo / step - 1e-9) * step
    return [round(first + i * step, 10) for i in range(int((hi - first) / step + 1e-9) + 1)]


def svg_uri(svg: str) -> str:
    """A ``data:image/svg+xml`` URI of SVG text."""
    return "data:image/svg+xml;base64," + base64.b64encode(svg.encode("utf-8")).decode("ascii")
