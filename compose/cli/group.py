"""The `compose` command's click group; each subcommand lives in its own module (the entry point,
:func:`compose.cli.main.main`, imports this module only once a draft check's marks process is
forked, see there; it is imported through that module, which sets OPENBLAS_NUM_THREADS)."""
from __future__ import annotations

import importlib

import click

from compose import __version__
from compose.cli.failure import guarded, set_debug

__all__ = ["cli", "handle_errors", "LazyGroup", "COMMANDS"]

# name -> module under compose.cli defining a click command called `command`
COMMANDS = {
    "ramp": "compose.cli.ramp",
    "ramps": "compose.cli.ramps",
    "render": "compose.cli.render",
    "check": "compose.cli.check",
    "fix": "compose.cli.fix",
    "proof": "compose.cli.proof",
    "demo": "compose.cli.demo",
    "init": "compose.cli.init",
    "tiles": "compose.cli.tiles",
}


def handle_errors(func):
    """Exit codes and one-line errors for a command: 2 for bad input (a ComposeError), 3 when
    compose itself failed, 130/143 when interrupted (see :mod:`compose.cli.failure`)."""
    return guarded(func)


class LazyGroup(click.Group):
    """A group whose subcommands are imported only when used (heavy imports stay out of --help)."""

    def list_commands(self, ctx):
        return [name for name in COMMANDS if self._load(name) is not None]

    def get_command(self, ctx, name):
        return self._load(name)

    @staticmethod
    def _load(name):
        modname = COMMANDS.get(name)
        if modname is None:
            return None
        try:
            module = importlib.import_module(modname)
        except ModuleNotFoundError as exc:
            if exc.name == modname:
                return None  # command not built yet
            raise
        return module.command


@click.group(cls=LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="compose",
                      message="%(prog)s %(version)s (distribution compose-maps)")
@click.option("--debug", is_flag=True,
              help="Show tracebacks and library warnings (also: environment COMPOSE_DEBUG=1).")
def cli(debug: bool):
    """Compose layered thematic maps from a TOML style and check their visual hierarchy.

    Exit codes: 0 passed, 1 a check rule failed, 2 bad input, 3 compose itself failed.
    Not for navigation or safety decisions: the maps are illustrations.
    """
    set_debug(debug)
