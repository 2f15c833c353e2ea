"""``compose ramps [--style FILE] [--sheet FILE.png]``: the ramp library at a glance.

One line per ramp: a swatch strip (24-bit colour blocks when the output is a terminal that shows
colour, nothing otherwise), the name, kind and domain (or class count). ``--sheet`` writes the
same list as a PNG contact sheet. The colours are the 8-bit colours the ramp draws
(:func:`compose.ramps.drawn_samples`).
"""
from __future__ import annotations

import os
from pathlib import Path

import click

from compose.cli.main import handle_errors

__all__ = ["command", "swatch_strip", "describe_ramp", "write_sheet", "STRIP_CELLS"]

#: Cells of a terminal swatch strip (two character columns each).
STRIP_CELLS = 16


def describe_ramp(ramp) -> str:
    """``'sequential, 0 to 12'``, ``'twin of land, 0 to 12'``, ``'qualitative, 8 classes'``."""
    if ramp.kind == "qualitative":
        return f"qualitative, {len(ramp.classes)} classes"
    kind = f"twin of {ramp.twin_of}" if ramp.twin_of else ramp.kind
    lo, hi = ramp.domain
    extra = ""
    if ramp.kind == "diverging" and ramp.center is not None:
        extra = f", centre {ramp.center:g}"
    elif ramp.kind == "threshold" and ramp.at is not None:
        extra = f", break at {ramp.at:g}"
    if ramp.stepped:
        extra += f", {len(ramp.class_edges()) - 1} steps"
    return f"{kind}, {lo:g} to {hi:g}{extra}"


def _strip_colors(ramp, cells: int):
    """(cells, 3) uint8 colours across the ramp as drawn (a qualitative ramp's classes)."""
    import numpy as np

    from compose.ramps import drawn_samples

    if ramp.kind == "qualitative":
        return drawn_samples(ramp)[1]
    lo, hi = ramp.domain
    values = lo + (np.arange(cells) + 0.5) / cells * (hi - lo)
    if ramp.stepped:
        lut = ramp.lut()
        return lut.rgb8[lut.index(values)]
    from compose.color.parse import to_rgb8
    return to_rgb8(ramp.colors_at(values))


def swatch_strip(ramp, cells: int = STRIP_CELLS) -> str:
    """The ramp as a row of 24-bit ANSI background-colour blocks (ECMA-48 SGR 48;2;r;g;b)."""
    rgb8 = _strip_colors(ramp, cells)
    per = max(1, (2 * cells) // len(rgb8))
    blocks = "".join(f"\x1b[48;2;{r};{g};{b}m" + " " * per for r, g, b in rgb8.tolist())
    return blocks + "\x1b[0m"


def _use_color(choice: bool | None) -> bool:
    if choice is not None:
        return choice
    if os.environ.get("NO_COLOR"):      # no-color.org convention
        return False
    stream = click.get_text_stream("stdout")
    return bool(getattr(stream, "isatty", lambda: False)()) and os.environ.get("TERM") != "dumb"


def write_sheet(path: Path, ramps: dict, title: str) -> None:
    """A PNG sheet: one labelled strip per ramp (written through a temporary file)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from compose.color import interface as ui
    from compose.output.atomic import atomic_path

    n = max(1, len(ramps))
    fig = Figure(figsize=(8.0, 0.9 + 0.42 * n), dpi=150)
    FigureCanvasAgg(fig)
    fig.text(0.02, 1 - 0.25 / (0.9 + 0.42 * n), title, fontsize=11, color=ui.INK.hex, va="center")
    top = 1 - 0.6 / (0.9 + 0.42 * n)
    row = (top - 0.3 / (0.9 + 0.42 * n)) / n
    for i, (name, ramp) in enumerate(ramps.items()):
        y = top - (i + 1) * row
        ax = fig.add_axes((0.30, y + row * 0.18, 0.67, row * 0.64))
        rgb = _strip_colors(ramp, 256)
        ax.imshow(rgb[None, :, :], aspect="auto", interpolation="nearest")
        ax.set_axis_off()
        fig.text(0.02, y + row * 0.62, name, fontsize=8.5, color=ui.INK.hex, va="center")
        fig.text(0.02, y + row * 0.30, describe_ramp(ramp), fontsize=6.5, color=ui.MUTED.hex,
                 va="center")
    import io

    from compose.page.dates import dated_png

    buf = io.BytesIO()
    fig.savefig(buf, format="png", facecolor=ui.PAPER.hex)
    with atomic_path(Path(path)) as tmp:        # SOURCE_DATE_EPOCH's tIME, or no date
        tmp.write_bytes(dated_png(buf.getvalue()))


@click.command("ramps")
@click.option("--style", "style_path", default=None,
              type=click.Path(exists=True, dir_okay=False, path_type=Path),
              help="Also list this style's own ramps (they replace library ramps of the same name).")
@click.option("--sheet", "sheet", type=click.Path(dir_okay=False, path_type=Path), default=None,
              help="Also write the list as a PNG sheet.")
@click.option("--color/--no-color", "color", default=None,
              help="Swatch strips in 24-bit colour (default: when writing to a terminal).")
@handle_errors
def command(style_path: Path | None, sheet: Path | None, color: bool | None) -> None:
    """List the ramp library (and a style's own ramps) with a swatch strip per ramp."""
    from compose.ramps import build_ramps
    from compose.ramps.library import library_path
    from compose.style.load import library_tables

    tables = dict(library_tables())
    own: set[str] = set()
    if style_path is not None:
        from compose.ramps.library import with_library
        from compose.style import load_style

        style = load_style(style_path, require_map=False)
        own = set(style.ramps)
        tables = dict(with_library(style.ramps, list(library_tables()), library_tables()))
    ramps = build_ramps(tables)
    colored = _use_color(color)
    width = max(len(n) for n in ramps) if ramps else 0
    for name, ramp in ramps.items():
        strip = swatch_strip(ramp) + "  " if colored else ""
        mark = "  (style)" if name in own else ""
        click.echo(f"{strip}{name:<{width}}  {describe_ramp(ramp)}{mark}", color=colored)
    source = str(style_path) if style_path is not None else str(library_path())
    click.echo(f"{len(ramps)} ramps ({source}); show one with: compose ramp NAME")
    if sheet is not None:
        write_sheet(sheet, ramps, "compose ramps" + (f" + {style_path.name}" if style_path else ""))
        click.echo(f"sheet written: {sheet}")
