"""``compose render STYLE [--out DIR] [--overwrite]``."""
from __future__ import annotations

from pathlib import Path

import click

from compose.cli.limits import limit_options
from compose.cli.main import handle_errors

__all__ = ["command", "print_summary", "progress_bar"]


class progress_bar:
    """A click progress bar that appears only for renders of more than a few windows."""

    def __init__(self, label: str):
        self.label = label
        self.bar = None

    def __call__(self, done: int, total: int) -> None:
        if total <= 4:
            return
        if self.bar is None:
            self.bar = click.progressbar(length=total, label=self.label, file=click.get_text_stream("stderr"))
            self.bar.__enter__()
        self.bar.update(1)
        if done == total:
            self.bar.__exit__(None, None, None)


def print_summary(result) -> None:
    """Outputs, size, time, unplaced labels and the check verdict of one render."""
    click.echo(f"rendered {result.width} x {result.height} px in {result.seconds['total']:.1f} s")
    for kind, path in result.outputs.items():
        size = path.stat().st_size / 1e6 if path.exists() else 0
        click.echo(f"  {kind:<7} {path}  ({size:.1f} MB)")
    for layer, labels in result.unplaced_labels.items():
        click.echo(f"  layer \"{layer}\": {len(labels)} label(s) not placed: {', '.join(labels)}")
    if result.report is not None:
        failed = [r for r in result.report.rules if not r.passed]
        verdict = "passed" if result.report.passed else f"FAILED ({len(failed)} rule(s))"
        click.echo(f"  check   {verdict}")


@click.command("render")
@click.argument("style", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=Path("out"), show_default=True,
              help="Folder for NAME.png, NAME.tif, NAME.legend.png, NAME.check.json, NAME.html.")
@click.option("--overwrite", is_flag=True, help="Replace existing outputs.")
@limit_options
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Processes rendering windows at once (default: every core for maps of 16 "
                   "Mpixel or more, else 1). Outputs are the same for any number.")
@click.option("--cluster", metavar="ADDRESS", default=None,
              help="Render the windows on a dask.distributed scheduler (tcp://host:8786); every "
                   "worker must reach the style's source files.")
@handle_errors
def command(style: Path, out_dir: Path, overwrite: bool, workers: int | None,
            cluster: str | None) -> None:
    """Render STYLE to a PNG, an RGBA GeoTIFF, a legend and a check report."""
    from compose.parallel import mapper_for
    from compose.render import render_style
    from compose.style import load_style

    loaded = load_style(style)
    for note in loaded.canvas_plan().notes:
        click.echo(f"note: {note}", err=True)
    canvas = loaded.canvas()
    mapper = mapper_for(canvas.width * canvas.height, workers, cluster)
    result = render_style(loaded, out_dir, overwrite=overwrite, progress=progress_bar("rendering"),
                          mapper=mapper)
    print_summary(result)
