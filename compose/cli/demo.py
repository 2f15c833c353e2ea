"""``compose demo [--out DIR]``: render every demo style with its legend, report and proofs."""
from __future__ import annotations

import time
from pathlib import Path

import click

from compose.cli.main import handle_errors

__all__ = ["command", "DEMO_STYLES", "styles_dir"]

# style file -> whether its check is meant to pass (the last one is the counter-example)
DEMO_STYLES: list[tuple[str, bool]] = [
    ("coast.toml", True),
    ("sea-warmth.toml", True),
    ("change.toml", True),
    ("cover.toml", True),
    ("poor.toml", False),
]


def styles_dir() -> Path:
    """The repository's styles/ folder (the demo runs from a checkout)."""
    return Path(__file__).resolve().parents[2] / "styles"


@click.command("demo")
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=Path("out/demo"),
              show_default=True, help="Folder for the maps, legends, reports and proofs.")
@handle_errors
def command(out_dir: Path) -> None:
    """Render the invented demo region with every example style (existing outputs are replaced)."""
    from compose.cli.render import print_summary
    from compose.caution import CAUTION
    from compose.render import render_style
    from compose.style import load_style

    folder = styles_dir()
    if not folder.is_dir():
        click.echo("no demo yet: styles/ not found next to the package")
        return
    t0 = time.perf_counter()
    surprises = []
    verdicts = []
    for filename, should_pass in DEMO_STYLES:
        path = folder / filename
        if not path.exists():
            click.echo(f"(skipping {filename}: not in styles/)")
            continue
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
