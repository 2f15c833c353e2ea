"""``compose tiles STYLE --zoom 4-12 --out DIR``."""
from __future__ import annotations

from pathlib import Path

import click

from compose.cli.limits import limit_options
from compose.cli.main import handle_errors

__all__ = ["command"]


@click.command("tiles")
@click.argument("style", type=click.Path(path_type=Path))
@click.option("--zoom", "zoom", default="8-12", show_default=True,
              help="Zoom levels: a range 4-12, one level 7, or a list 4,6,8.")
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=Path("out/tiles"),
              show_default=True, help="Folder for z/x/y.png, index.html and check.json.")
@limit_options
@handle_errors
def command(style: Path, zoom: str, out_dir: Path) -> None:
    """Render STYLE as 256-pixel Web Mercator tiles (z/x/y.png) with a viewer page and a check
    report from the tiles' statistics. Exit 1 when a check rule fails."""
    import sys

    from compose.style import load_style
    from compose.tiles.grid import parse_zooms
    from compose.tiles.render import render_tiles

    try:
        zooms = parse_zooms(zoom)
    except ValueError as e:
        raise click.BadParameter(str(e)) from None
    result = render_tiles(load_style(style), out_dir, zooms)
    total = sum(result.tiles.values())
    click.echo(f"wrote {total} tiles in {result.seconds['total']:.1f} s: "
               + ", ".join(f"z{z} {n}" for z, n in result.tiles.items()))
    click.echo(f"  viewer  {result.viewer}")
    if result.report is not None:
        failed = [r for r in result.report.rules if not r.passed]
        click.echo(f"  check   {'passed' if result.report.passed else f'FAILED ({len(failed)} rule(s))'}"
                   f"  ({out_dir / 'check.json'})")
        if not result.report.passed:
            sys.exit(1)
