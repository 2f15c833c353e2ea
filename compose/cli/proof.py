"""``compose proof STYLE [--out DIR] [--overwrite]``: grey and CVD proofs plus a contact sheet."""
from __future__ import annotations

from pathlib import Path

import click

from compose.cli.limits import limit_options
from compose.cli.main import handle_errors

__all__ = ["command"]


@click.command("proof")
@click.argument("style", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", type=click.Path(path_type=Path), default=Path("out"),
              show_default=True,
              help="Folder for NAME.proof-{gray,deutan,protan,tritan,sheet}.png.")
@click.option("--overwrite", is_flag=True, help="Replace existing proofs.")
@limit_options
@handle_errors
def command(style: Path, out_dir: Path, overwrite: bool) -> None:
    """Write STYLE as it reads in grey (same CIELAB L*) and with deutan, protan and tritan
    vision (Machado et al. 2009, severity 100), and a sheet with the map and the four side by side.
    """
    from compose.cli.render import progress_bar
    from compose.proof import PROOF_RULES, write_proofs
    from compose.render import CAUTION
    from compose.style import load_style

    result = write_proofs(load_style(style), out_dir, overwrite=overwrite,
                          progress=progress_bar("proofing"))
    click.echo(f"proofs of {result.width} x {result.height} px in {result.seconds['total']:.1f} s")
    for kind, path in result.outputs.items():
        click.echo(f"  {kind:<7} {path}")
    if result.report is not None:
        for r in result.report.rules:
            if r.rule in PROOF_RULES:
                verdict = "pass" if r.passed else "FAIL"
                click.echo(f"  {r.rule:<26} {r.layer or '-':<14} {verdict:<5} {r.message}")
    click.echo(CAUTION)
