"""``compose fix STYLE [--write NEW.toml]``: apply the checker's proposed changes until it passes.

Prints the diff of the style text and the failed rules' values before and after. Without
``--write`` nothing is written. Exit status: 0 when the fixed style passes, 1 when it still
fails (the diff shows what helped), 2 on invalid input.
"""
from __future__ import annotations

from pathlib import Path

import click

from compose.cli.main import handle_errors

__all__ = ["command"]


def _values(report) -> dict:
    return {(r.rule, r.layer): r for r in report.rules}


def _num(v) -> str:
    from compose.check.report import format_pair
    return format_pair(v, 0.0, "", True)[0] if not isinstance(v, (int, float)) else f"{v:.4g}"


@click.command("fix")
@click.argument("style", type=click.Path(path_type=Path))
@click.option("--write", "write_to", type=click.Path(dir_okay=False, path_type=Path),
              help="Write the fixed style here (comments and layout kept; paths rebased).")
@click.option("--full", is_flag=True,
              help="Re-check at full resolution in every round (default: draft resolution).")
@click.option("--overwrite", is_flag=True, help="Replace an existing --write file.")
@handle_errors
def command(style: Path, write_to: Path | None, full: bool, overwrite: bool) -> None:
    """Apply the fixes the check proposes to STYLE, re-check, repeat until it passes or no fix
    helps; print the diff and the failed rules' values before and after.

    Without --write only the diff is shown. Exits 0 when the fixed style passes, 1 when it
    still fails, 2 on invalid input.
    """
    import tomlkit

    from compose.errors import OutputError
    from compose.fix import fix_style, rebase_paths
    from compose.output.atomic import atomic_path

    result = fix_style(style, draft=not full)
    text = result.text
    if write_to is not None:
        if write_to.exists() and not overwrite:
            raise OutputError(f"{write_to} exists; add --overwrite to replace it")
        doc = tomlkit.parse(text)
        rebase_paths(doc, result.path.parent, write_to.resolve().parent)
        text = tomlkit.dumps(doc)
    diff = result.diff(text=text, new_name=write_to.name if write_to is not None else None)
    click.echo(diff if diff else "no change: nothing the check proposes applies")
    before, after = _values(result.before), _values(result.after)
    rows = [(k, r) for k, r in before.items() if not r.passed]
    if rows:
        click.echo("")
        click.echo(f"{'rule':<26} {'layer':<20} {'before':>10}  {'after':>10}  verdict")
        for key, r in rows:
            a = after.get(key)
            click.echo(f"{r.rule:<26} {(r.layer or '-')[:20]:<20} {_num(r.value):>10}  "
                       f"{_num(a.value) if a else '-':>10}  {a.verdict if a else 'gone'}")
    n = len(result.rounds)
    verdict = "passes" if result.after.passed else (
        f"still fails: {', '.join(dict.fromkeys(r.rule for r in result.after.failures))}")
    res = result.checked
    click.echo(f"\n{result.path.name}: {n} round(s) of fixes; the fixed style {verdict} "
               f"({res} check)")
    if write_to is not None:
        with atomic_path(write_to) as tmp:
            tmp.write_text(text, encoding="utf-8")
        click.echo(f"written: {write_to}")
    raise SystemExit(0 if result.after.passed else 1)
