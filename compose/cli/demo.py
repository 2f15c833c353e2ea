"""``compose demo [--out DIR] [--data-only]``: copy the invented demo region into the output
folder and render every demo style with its legend, report and proofs.

The styles and the region ship with the package (:mod:`compose.demo`), so the demo works the same
from a checkout and after a plain ``pip install``. A missing style is an error, never a skip."""
from __future__ import annotations

import time
from pathlib import Path

import click

from compose.cli.main import handle_errors

__all__ = ["command", "DEMO_STYLES", "styles_dir", "copy_region"]

# style file -> whether its check is meant to pass (the last one is the counter-example)
DEMO_STYLES: list[tuple[str, bool]] = [
    ("coast.toml", True),
    ("sea-warmth.toml", True),
    ("change.toml", True),
    ("cover.toml", True),
    ("poor.toml", False),
]


def styles_dir() -> Path:
    """The demo styles' folder (a checkout's styles/, or the installed copy)."""
    from compose.demo import styles_dir as where
    return where()


#: The demo region's files copied for the user (the generator's code stays in the package).
REGION_FILES = ("*.tif", "*.gpkg", "README.md")


def copy_region(out_dir: Path) -> tuple[Path, list[str]]:
    """Copy the demo region's data into ``out_dir/demo_region`` (files already there with the
    same size are kept); returns the folder and the names copied. Each file is written to a
    temporary name and renamed into place."""
    import shutil

    from compose.demo import region_dir
    from compose.output.atomic import atomic_path

    source = region_dir()
    target = Path(out_dir) / "demo_region"
    copied = []
    for pattern in REGION_FILES:
        for path in sorted(source.glob(pattern)):
            dest = target / path.name
            if dest.is_file() and dest.stat().st_size == path.stat().st_size:
                continue
            with atomic_path(dest) as tmp:
                shutil.copyfile(path, tmp)
            copied.append(path.name)
    return target, copied


@click.command("demo")
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=Path("out/demo"),
              show_default=True, help="Folder for the maps, legends, reports and proofs.")
@click.option("--data-only", is_flag=True,
              help="Only copy the demo region's rasters and vectors into OUT/demo_region.")
@handle_errors
def command(out_dir: Path, data_only: bool) -> None:
    """Render the invented demo region with every example style (existing outputs are replaced).

    The region's data (invented: no real place) is copied into OUT/demo_region for you to try
    `compose init` on.
    """
    from compose.caution import CAUTION
    from compose.cli.render import print_summary
    from compose.errors import ComposeError
    from compose.page.dates import source_date
    from compose.render import render_style
    from compose.style import load_style

    source_date()           # a malformed SOURCE_DATE_EPOCH stops the command before any work
    folder = styles_dir()
    region, copied = copy_region(out_dir)
    click.echo(f"demo region: {region} ({len(copied)} file(s) copied; invented data, no real place)")
    if data_only:
        click.echo(f"try: compose init {region / 'elevation.tif'} {region / 'anomaly.tif'} "
                   f"{region / 'vectors.gpkg'} --out my-map.toml")
        return
    t0 = time.perf_counter()
    surprises = []
    verdicts = []
    for filename, should_pass in DEMO_STYLES:
        path = folder / filename
        if not path.exists():
            raise ComposeError(f"demo style missing: {path}")
        style = load_style(path)
        click.echo(f"\n== {style.name}: {style.map.title}")
        result = render_style(style, out_dir, overwrite=True, proofs=True)
        print_summary(result)
        passed = result.report.passed if result.report is not None else None
        verdicts.append((style.name, passed, should_pass))
        if passed is not None and passed != should_pass:
            surprises.append(style.name)
    click.echo("\nverdicts:")
    for name, passed, should_pass in verdicts:
        word = "passes" if passed else "fails"
        meant = "as intended" if passed == should_pass else "UNEXPECTED"
        click.echo(f"  {name:<12} {word:<7} ({meant})")
    click.echo(f"\nall outputs in {out_dir} ({time.perf_counter() - t0:.0f} s)")
    click.echo(CAUTION)
    if surprises:
        raise click.ClickException("demo verdicts differ from the intended ones: " + ", ".join(surprises))
