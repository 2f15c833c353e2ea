"""``compose ramp NAME [--style FILE]``: show a ramp's colours, its metrics and the rule verdicts."""
from __future__ import annotations

import json
from pathlib import Path

import click

from compose.cli.main import handle_errors
from compose.errors import ComposeError, StyleError

__all__ = ["command", "load_ramps"]


def load_ramps(style_path: Path | None, names=()) -> dict:
    """Build the ramps of the style at ``style_path`` (twins need all their group), completed
    with the library ramps named in ``names``; without a style, the whole library."""
    from compose.ramps import build_ramps
    from compose.ramps.library import with_library
    from compose.style import load_style
    from compose.style.load import library_tables

    if style_path is None:
        return build_ramps(library_tables())
    style = load_style(style_path, require_map=False)
    return build_ramps(with_library(style.ramps, names, library_tables()))


def _limits(style_path: Path | None):
    """The ramp rules' limits from the style's budgets (the checker's, see compose.check.catalog)."""
    from compose.ramps import RampLimits
    from compose.style import load_style

    if style_path is None:
        return RampLimits()
    return RampLimits.from_budgets(load_style(style_path, require_map=False).budgets)


def _budgets(style_path: Path | None):
    """The style's budgets (the defaults without a style): the figure draws the theme budget."""
    from compose.style import load_style
    from compose.style.model import Budgets

    if style_path is None:
        return Budgets()
    return load_style(style_path, require_map=False).budgets


def _rows(ramp, samples: int) -> list[dict]:
    from compose.color.lab import srgb_to_lch
    from compose.ramps import drawn_samples

    values, rgb8 = drawn_samples(ramp, samples)
    lch = srgb_to_lch(rgb8 / 255.0)
    rows = []
    for i, (v, code, (L, C, h)) in enumerate(zip(values, rgb8, lch)):
        row = {"value": float(v), "hex": "#{:02x}{:02x}{:02x}".format(*tuple(int(c) for c in code)),
               "L": round(float(L), 3), "C": round(float(C), 3), "h": round(float(h), 3)}
        if ramp.kind == "qualitative":
            row["label"] = ramp.classes[i].label
            row["family"] = ramp.classes[i].family
        rows.append(row)
    return rows


def _metric_lines(m) -> list[str]:
    lines = [f"  lightness   L* {m.lightness_range[0]:.1f} to {m.lightness_range[1]:.1f}",
             f"  chroma      C* {m.chroma_range[0]:.1f} to {m.chroma_range[1]:.1f}"]
    if m.lightness_monotone is not None:
        lines.append(f"  monotone    {'yes' if m.lightness_monotone else 'no'} "
                     f"(largest L* reversal {m.lightness_reversal:.2f})")
    if m.step_cv is not None:
        lines.append(f"  steps       evenness CV {m.step_cv:.1f} % at 16 equal data steps; "
                     f"{m.step_cv_8bit:.1f} % at 32 8-bit samples")
    if m.grayscale_rho is not None:
        lines.append(f"  grey order  Spearman rho {m.grayscale_rho:+.3f}")
    lines.append(f"  gamut       C* removed max {m.gamut_removed_max:.2f}, mean {m.gamut_removed_mean:.2f}")
    if m.matched_removed_max > 0:
        lines.append(f"  twins       C* removed to match max {m.matched_removed_max:.2f}, "
                     f"mean {m.matched_removed_mean:.2f}")
    if m.symmetry_dl_max is not None:
        lines.append(f"  symmetry    |dL*| max {m.symmetry_dl_max:.2f}; midpoint C* {m.midpoint_chroma:.1f}")
    if m.break_dl is not None:
        lines.append(f"  break       |dL*| {m.break_dl:.2f}, hue change {m.break_dh:.0f} deg, "
                     f"dE00 {m.break_de00:.1f}")
    if m.twin_dl_max is not None:
        lines.append(f"  twin        |dL*| max {m.twin_dl_max:.2f}, |dC*| max {m.twin_dc_max:.2f}")
    for title, d in (("adjacent", m.min_step_de00), ("pairwise", m.min_pair_de00)):
        if d:
            lines.append(f"  {title:<11} min dE00 " + ", ".join(f"{k} {v:.1f}" for k, v in d.items()))
    for fam, d in (m.family_min_pair_de00 or {}).items():
        lines.append(f"  family {fam:<5} min dE00 " + ", ".join(f"{k} {v:.1f}" for k, v in d.items()))
    lines.append(f"  nodata      {m.nodata_min_de00:.1f} dE00 from the ramp, C* {m.nodata_chroma:.1f}")
    lines += [f"  warning     {w}" for w in m.warnings]
    return lines


@click.command("ramp")
@click.argument("name")
@click.option("--style", "style_path", default=None,
              type=click.Path(exists=True, dir_okay=False, path_type=Path),
              help="Style file (TOML) whose ramps replace library ramps of the same name; "
                   "default: the library only.")
@click.option("--samples", type=click.IntRange(2, 65533), default=11, show_default=True,
              help="Rows of the table / objects of --json, evenly spaced over the domain.")
@click.option("--json", "as_json", is_flag=True, help="Print the samples as a JSON array instead.")
@click.option("--plot", "plot_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Also write a figure of the ramp (PNG).")
@click.option("--units", default=None, help="Units of the data values, for the figure's axis.")
@handle_errors
def command(name: str, style_path: Path | None, samples: int, as_json: bool, plot_path: Path | None,
            units: str | None) -> None:
    """Show ramp NAME (of the library, or of --style): sampled colours (value, hex, CIE L*, C*, h), metrics, rules.

    L*, C* and h are CIE LCh(ab) under D65 of the 8-bit colour as drawn.
    """
    from compose.ramps import ramp_metrics, rule_checks

    ramps = load_ramps(style_path, [name])
    limits = _limits(style_path)
    if name not in ramps:
        from compose.style.load import library_tables
        known = ", ".join(sorted(set(ramps) | set(library_tables()))) or "(none)"
        where = f"{style_path}: " if style_path is not None else ""
        raise StyleError(f'{where}no ramp "{name}"; ramps: {known}')
    ramp = ramps[name]
    rows = _rows(ramp, samples)
    if plot_path is not None:
        from compose.ramps.figure import write_ramp_plot
        if not plot_path.parent.is_dir():
            raise ComposeError(f"--plot: folder does not exist: {plot_path.parent}")
        write_ramp_plot(ramp, plot_path, ramps, units, limits=limits, budgets=_budgets(style_path))
    if as_json:
        click.echo(json.dumps(rows, indent=1))
        return
    m = ramp_metrics(ramp)
    extra = f", twin of {ramp.twin_of}" if ramp.twin_of else ""
    where = f"domain {ramp.domain[0]:g} to {ramp.domain[1]:g}" if ramp.kind != "qualitative" else \
        f"{len(ramp.classes)} classes"
    click.echo(f'ramp "{name}": {ramp.kind}{extra}, {where}  ({ramp.path or style_path})')
    if ramp.kind == "qualitative":
        click.echo(f"  {'value':>8}  {'label':<22} {'family':<10} {'hex':<8} {'L*':>6} {'C*':>6} {'h':>6}")
        for r in rows:
            click.echo(f"  {r['value']:>8g}  {r['label'][:22]:<22} {(r['family'] or '-'):<10} {r['hex']:<8} "
                       f"{r['L']:>6.1f} {r['C']:>6.1f} {r['h']:>6.0f}")
    else:
        click.echo(f"  {'value':>10}  {'hex':<8} {'L*':>6} {'C*':>6} {'h':>6}")
        for r in rows:
            click.echo(f"  {r['value']:>10.4g}  {r['hex']:<8} {r['L']:>6.1f} {r['C']:>6.1f} {r['h']:>6.0f}")
    click.echo("metrics")
    for line in _metric_lines(m):
        click.echo(line)
    click.echo("rules")
    for c in rule_checks(m, limits):
        verdict = "ok" if c.passed else ("warn" if c.level == "warning" else "FAIL")
        click.echo(f"  {verdict:<5} {c.rule:<30} {c.message.split(': ', 1)[1]}")
    if plot_path is not None:
        click.echo(f"figure written: {plot_path}")
