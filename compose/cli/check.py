"""``compose check STYLE [--json] [--strict] [--draft]``: render in memory (nothing written) and
judge the hierarchy; ``compose check --rules`` / ``--explain RULE``: the rule catalogue.

Exit status: 0 when every rule passes (warnings allowed unless ``--strict``), 1 when any rule
fails, 2 on invalid input (a one-line error, see :func:`compose.cli.main.handle_errors`).
"""
from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import click

from compose.cli.limits import limit_options
from compose.cli.main import handle_errors
from compose.heap import DRAFT_MMAP_BYTES, DRAFT_TRIM_BYTES, reuse_freed_memory  # noqa: F401

__all__ = ["command", "rules_table", "explain", "reuse_freed_memory"]

# (reuse_freed_memory is compose.heap's: a draft command calls it before click is imported, see
# compose.layers.early_marks.start_command)


def rules_table() -> str:
    """``compose check --rules``: id, what, limit (budget key and default), source."""
    import textwrap

    from compose.check.catalog import CATALOG
    from compose.style.model import Budgets

    lines = []
    for info in CATALOG.values():
        lines += _explain(info, Budgets(), textwrap) + [""]
    return "\n".join(lines).rstrip()


def _explain(info, budgets, textwrap) -> list[str]:
    from compose.check.catalog import limit_of

    limit, origin, key = limit_of(info.id, budgets)
    if isinstance(limit, list):
        limit = " .. ".join(f"{v:g}" for v in limit)
    elif isinstance(limit, float):
        limit = f"{limit:g}"
    where = (f"{key}, default {limit}" if key else
             limit if isinstance(limit, str) else f"fixed {limit}")
    sev = "" if info.severity == "failure" else f"  ({info.severity})"
    out = [f"{info.id}{sev}"]
    out += textwrap.wrap(info.what, 96, initial_indent="  what:   ", subsequent_indent="          ")
    out.append(f"  limit:  value {info.comparison} limit ({info.unit}); {where}")
    out.append(f"  on:     {info.measured}")
    out += textwrap.wrap(info.source, 96, initial_indent="  source: ", subsequent_indent="          ")
    return out


def explain(rule: str) -> str:
    """``compose check --explain RULE``."""
    import textwrap

    from compose.check.catalog import CATALOG
    from compose.errors import StyleError
    from compose.style.model import Budgets
    from compose.style.validate import Scope, check_choice

    if rule not in CATALOG:
        check_choice(rule, CATALOG, Scope("--explain"), "rule id")
        raise StyleError(f"--explain: unknown rule {rule!r}")
    return "\n".join(_explain(CATALOG[rule], Budgets(), textwrap))


@click.command("check")
@click.argument("style", type=click.Path(path_type=Path), required=False)
@click.option("--json", "as_json", is_flag=True,
              help="Print the report as JSON (the same object render writes as NAME.check.json).")
@click.option("--strict", is_flag=True, help="Warnings fail too (exit 1).")
@click.option("--set", "sets", multiple=True, metavar="KEY=VALUE",
              help="Override a style key for this check, validated like the file (as in "
                   "`compose render`): layer.NAME.width=0.9, ramp.NAME.domain=[0,10]. Repeatable.")
@click.option("--draft", is_flag=True,
              help="Check a reduced canvas of the same extent (longer side at most 384 px, same "
                   "dpi; rasters read decimated, or large files without overviews from an even "
                   "sample of their blocks): much faster on large maps, the same verdict on the "
                   "example styles.")
@click.option("--no-cache", is_flag=True,
              help="Neither read nor write the cache of prepared inputs (see --cache-dir).")
@click.option("--cache-dir", type=click.Path(path_type=Path), metavar="DIR",
              help="Where the check keeps the layers' coverage and indices between runs, so a "
                   "check after a change of colours only is fast (default: $COMPOSE_CACHE, else "
                   "$XDG_CACHE_HOME/compose, else ~/.cache/compose).")
@click.option("--clear-cache", is_flag=True,
              help="Delete the cache's entries first (with no STYLE: only that).")
@click.option("--workers", type=click.IntRange(min=1), default=None,
              help="Processes that walk the map's windows when sources are read (no cache, or "
                   "one being filled), forked once the render is prepared (default: one per "
                   "core, each walking two windows or more, unless the load average is over "
                   "twice the cores); the same report and cache with any number.")
@click.option("--rules", "list_rules", is_flag=True,
              help="List the rules: id, what each measures, its limit and budget key, its source.")
@click.option("--explain", "explain_rule", metavar="RULE", help="Print one rule of --rules.")
@limit_options
@handle_errors
def command(style: Path | None, as_json: bool, strict: bool, sets: tuple[str, ...], draft: bool,
            no_cache: bool, cache_dir: Path | None, clear_cache: bool, workers: int | None, list_rules: bool,
            explain_rule: str | None) -> None:
    """Check the visual hierarchy of STYLE: budgets, contrast, ramps, classes, grey order.

    Exits 0 when every rule passes (warnings allowed unless --strict), 1 when any fails, 2 when
    the style is invalid. `compose check --rules` lists the rules; `--explain RULE` one of them.
    The layers' coverage and indices are kept in a cache between runs (keyed by the sources'
    size and modification time, the canvas and the style keys that change geometry, never by
    colours): a check after changing only colours, opacity or blend skips reading and drawing.
    """
    if list_rules or explain_rule:
        click.echo(rules_table() if list_rules else explain(str(explain_rule)))
        return
    if clear_cache:
        from compose import check_cache

        removed = check_cache.clear_cache(check_cache.cache_dir(cache_dir))
        if style is None:
            click.echo(f"removed {removed} cache entries")
            return
    if style is None:
        raise click.UsageError("give a STYLE to check (or --rules / --explain RULE)")
    cache = False if no_cache else cache_dir
    from compose.style.overrides import parse_override

    overrides = tuple(parse_override(s) for s in sets)
    checked: Any = style
    drop: Any = None
    try:
        if draft:       # the draft's marks process forked before the checker's imports
            import gc

            # a draft is a short process of bounded memory (a canvas of at most 384 px a side):
            # Python's cyclic collector stays off, in this process and the marks process. Its
            # collections, triggered by the count of new objects, mostly traversed the modules
            # being imported (8192 benchmark: 74 + 7 collections, 16-30 ms of the process's
            # time, measured here); nothing the draft makes depends on them
            gc.disable()
            reuse_freed_memory()
            from compose.layers.early_marks import drop_early, start_early

            drop = drop_early
            checked = start_early(style, cache, overrides)
        elif overrides:
            from compose.style import load_style

            checked = load_style(style, overrides=overrides)
        from compose.api import check
        from compose.cli.render import progress_bar

        report = check(checked, progress=progress_bar("checking"), draft=draft, cache=cache,
                       workers=workers)
    finally:
        if drop is not None:
            drop()
    from compose.check import format_report

    if as_json:
        click.echo(json.dumps(report.to_json(strict), indent=2))
    else:
        click.echo(format_report(report, strict=strict))
    raise SystemExit(0 if report.passed_strict(strict) else 1)
