"""``compose init DATA... [--out style.toml] [--overwrite]``: a starter style from data files."""
from __future__ import annotations

from pathlib import Path

import click

from compose.cli.main import handle_errors

__all__ = ["command"]


@click.command("init")
@click.argument("data", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--out", "out", type=click.Path(dir_okay=False, path_type=Path),
              default=Path("style.toml"), show_default=True, help="The style file to write.")
@click.option("--overwrite", is_flag=True, help="Replace an existing style file.")
@handle_errors
def command(data: tuple[Path, ...], out: Path, overwrite: bool) -> None:
    """Inspect rasters (GeoTIFF, ...) and vector files (GeoPackage, ...) and write a commented
    starter style: relief for a DEM, a diverging ramp centred on 0 for signed data, a
    qualitative ramp for few integer classes, a sequential ramp otherwise, overlays with halos.
    Prints what it decided and why."""
    from compose.output.atomic import atomic_path, check_writable
    from compose.starter import inspect_path, starter_style

    check_writable([out], overwrite)
    facts = [inspect_path(p) for p in data]
    starter = starter_style(facts, out)
    with atomic_path(out) as tmp:
        tmp.write_text(starter.text, encoding="utf-8")
    width = max(len(c.source) for c in starter.choices)
    for c in starter.choices:
        click.echo(f"  {c.source:<{width}}  -> {c.became}: {c.why}")
    click.echo(f"style written: {out}")
    click.echo(f"next: compose render {out}")
