"""``compose render STYLE... [--out DIR] [--overwrite] [--set KEY=VALUE]... [--series]``."""
from __future__ import annotations

from pathlib import Path

import click

from compose.cli.limits import limit_options
from compose.cli.main import handle_errors

__all__ = ["command", "print_summary", "progress_bar", "expand_styles"]


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


def file_size(n: int) -> str:
    """A file's size in SI units (1 kB = 1000 bytes): "120 B", "45 kB", "3.3 MB" (a world file
    showed as "0.0 MB")."""
    if n < 1000:
        return f"{n} B"
    if n < 1_000_000:
        return f"{n / 1000:.0f} kB"
    return f"{n / 1e6:.1f} MB"


def print_summary(result, strict: bool = False) -> None:
    """Outputs, size, time, unplaced labels and the check verdict of one render."""
    click.echo(f"rendered {result.width} x {result.height} px in {result.seconds['total']:.1f} s")
    # one column for the paths however long the kinds ("proof-deutan"), "check" included
    wide = max([7] + [len(kind) for kind in result.outputs])
    for kind, path in result.outputs.items():
        size = path.stat().st_size if path.exists() else 0
        click.echo(f"  {kind:<{wide}} {path}  ({file_size(size)})")
    for layer, labels in result.unplaced_labels.items():
        click.echo(f"  layer \"{layer}\": {len(labels)} label(s) not placed: {', '.join(labels)}")
    if result.report is not None:
        rep = result.report
        failed = [r.rule for r in rep.rules if not r.passed]
        if strict:
            failed += [r.rule for r in rep.warnings]
        verdict = ("passed" if rep.passed_strict(strict) else
                   f"FAILED ({len(failed)} rule(s): {', '.join(dict.fromkeys(failed))}); "
                   "see NAME.check.json or `compose check`")
        click.echo(f"  {'check':<{wide}} {verdict}")


def expand_styles(args: tuple[Path, ...]) -> list[Path]:
    """Style paths from the command line, glob patterns expanded (sorted); a pattern matching no
    file is an error naming it."""
    import glob

    from compose.errors import StyleError

    out: list[Path] = []
    for arg in args:
        text = str(arg)
        if not arg.exists() and any(ch in text for ch in "*?["):
            matches = sorted(glob.glob(text, recursive=True))
            if not matches:
                raise StyleError(f"no style file matches {text!r}")
            out += [Path(m) for m in matches]
        else:
            out.append(arg)
    return out


@click.command("render")
@click.argument("styles", nargs=-1, required=True, type=click.Path(path_type=Path))
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=Path("out"), show_default=True,
              help="Folder for NAME.png, NAME.tif, NAME.legend.png, NAME.check.json, NAME.html.")
@click.option("--overwrite", is_flag=True, help="Replace existing outputs.")
@click.option("--set", "sets", multiple=True, metavar="KEY=VALUE",
              help="Override a style key, validated like the file: map.title=\"Dry season\", "
                   "layer.NAME.source=data/b.tif, ramp.NAME.domain=[0,10]. Repeatable.")
@click.option("--series", is_flag=True,
              help="Render every member of the style's [series] on shared scales, with an index page.")
@click.option("--no-check", "no_check", is_flag=True,
              help="Do not judge the hierarchy (no NAME.check.json); exit 0 whatever the map.")
@click.option("--strict", is_flag=True, help="Check warnings fail too (exit 1).")
@limit_options
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Threads rendering windows at once (default: every core but one, at most 8, "
                   "for maps of 16 Mpixel or more, else 1; the core left draws the lines and "
                   "encodes). Outputs are the same for any number.")
@click.option("--cluster", metavar="ADDRESS", default=None,
              help="Render the windows on a dask.distributed scheduler (tcp://host:8786); every "
                   "worker must reach the style's source files.")
@click.option("--cog", is_flag=True,
              help="Write NAME.tif as a Cloud Optimized GeoTIFF (internal tiles, overviews).")
@handle_errors
def command(styles: tuple[Path, ...], out_dir: Path, overwrite: bool, sets: tuple[str, ...],
            series: bool, no_check: bool, strict: bool, workers: int | None, cluster: str | None,
            cog: bool) -> None:
    """Render each STYLE (files or glob patterns) to a PNG, an RGB GeoTIFF, a legend, a check
    report and a proof page. With several styles an error in one is reported and the others
    still render; the exit code is the worst.

    Exits 1 when the hierarchy check fails (the outputs are still written, so CI renders once and
    keeps the evidence), unless --no-check; 0 when it passes, 2 on invalid input.
    """
    from compose.errors import ComposeError
    from compose.page.dates import source_date
    from compose.style.overrides import parse_override

    source_date()           # a malformed SOURCE_DATE_EPOCH stops the command before any work
    overrides = tuple(parse_override(s) for s in sets)
    paths = expand_styles(styles)
    run = dict(out_dir=out_dir, overwrite=overwrite, overrides=overrides, series=series,
               workers=workers, cluster=cluster, cog=cog, check=not no_check, strict=strict)
    if len(paths) == 1:
        if not _render_one(paths[0], **run):
            raise SystemExit(1)
        return
    failed, unchecked = [], []
    for path in paths:
        click.echo(f"== {path}")
        try:
            if not _render_one(path, **run):
                unchecked.append(str(path))
        except ComposeError as exc:
            click.echo(f"compose: error: {exc}", err=True)
            failed.append(str(path))
    if failed:
        click.echo(f"{len(failed)} of {len(paths)} style(s) not rendered: {', '.join(failed)}", err=True)
        raise SystemExit(2)
    if unchecked:
        raise SystemExit(1)


def _render_one(path: Path, *, out_dir: Path, overwrite: bool, overrides: tuple, series: bool,
                workers: int | None, cluster: str | None, cog: bool = False, check: bool = True,
                strict: bool = False) -> bool:
    """Render one style (or its series); False when its check failed."""
    from compose.timeline import note_process, span

    with span("import render"):
        from compose.errors import StyleError
        from compose.parallel import mapper_for
        from compose.render import render_style
        from compose.style import load_style

    if series:
        passed = _render_series(path, out_dir, overwrite, overrides, workers)
        return passed or not check
    with span("load style"):
        loaded = load_style(path, overrides=overrides)
    if loaded.series:
        raise StyleError(f"{path}: the style declares a series of {len(loaded.series)} members; "
                         "render it with --series")
    notes = loaded.canvas_plan().notes
    canvas = loaded.canvas()
    mapper = mapper_for(canvas.width * canvas.height, workers, cluster)
    from compose.heap import limit_arenas

    limit_arenas()          # before the walk's threads start: less freed memory kept per thread
    import gc

    # what is loaded so far (the modules, the style) outlives the render: kept out of the
    # collector's way while it runs, so its collections traverse only the render's own objects
    # (the command's collections at 8192 px 0.08 -> 0.04 CPU-s, demo 0.04-0.1 -> 0.02, measured
    # here); handed back afterwards, so the next style of the command can collect them
    gc.freeze()
    try:
        result = render_style(loaded, out_dir, overwrite=overwrite,
                              progress=progress_bar("rendering"), mapper=mapper, cog=cog,
                              check=check)
    finally:
        gc.unfreeze()
    # notes only after the render succeeded: a failing run prints its one error line alone
    for note in notes:
        click.echo(f"note: {note}", err=True)
    with span("summary"):
        print_summary(result, strict)
    note_process()
    return not check or result.report is None or result.report.passed_strict(strict)


def _render_series(path: Path, out_dir: Path, overwrite: bool, overrides: tuple,
                   workers: int | None) -> bool:
    from compose.series import render_series

    # members are whole renders in their own processes: --workers sets how many run at once
    result = render_series(path, out_dir, overrides=overrides, overwrite=overwrite, workers=workers)
    for m in result.members:
        values = ", ".join(f"{k}={v}" for k, v in m.variables.items())
        verdict = {True: "passed", False: "FAILED", None: "not checked"}[m.passed]
        click.echo(f"  {m.name:<24} {values:<28} {m.seconds:6.1f} s  check {verdict}")
    for name, e in result.scales.items():
        breaks = ", ".join(f"{b:.4g}" for b in e["breaks"]) if e["breaks"] else "-"
        click.echo(f"  scale {name}: domain {e['domain'][0]:g} to {e['domain'][1]:g}; breaks {breaks}")
    click.echo(f"  index   {result.index}")
    click.echo(f"  record  {result.record}")
    return all(m.passed is not False for m in result.members)
