"""``compose check STYLE [--json]``: render in memory (nothing written) and judge the hierarchy.

Exit status: 0 when every rule passes (warnings allowed), 1 when any rule fails, 2 on invalid
input (a one-line error, see :func:`compose.cli.main.handle_errors`).
"""
from __future__ import annotations

import json
from pathlib import Path

import click

from compose.cli.limits import limit_options
from compose.cli.main import handle_errors

__all__ = ["command"]


@click.command("check")
@click.argument("style", type=click.Path(path_type=Path))
@click.option("--json", "as_json", is_flag=True,
              help="Print the report as JSON (the same object render writes as NAME.check.json).")
@limit_options
@handle_errors
def command(style: Path, as_json: bool) -> None:
    """Check the visual hierarchy of STYLE: budgets, contrast, ramps, classes, grey order.

    Exits 0 when every rule passes, 1 when any fails, 2 when the style is invalid.
    """
    from compose.api import check
    from compose.check import format_report
    from compose.cli.render import progress_bar

    report = check(style, progress=progress_bar("checking"))
    if as_json:
        click.echo(json.dumps(report.to_json(), indent=2))
    else:
        click.echo(format_report(report))
    raise SystemExit(0 if report.passed else 1)
