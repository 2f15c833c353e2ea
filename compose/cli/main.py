"""Entry point of the `compose` command: a click group; each subcommand lives in its own module."""
from __future__ import annotations

import functools
import importlib
import sys

import click

from compose import __version__
from compose.errors import ComposeError

__all__ = ["main", "cli", "handle_errors"]

# name -> module under compose.cli defining a click command called `command`
COMMANDS = {
    "ramp": "compose.cli.ramp",
    "ramps": "compose.cli.ramps",
    "render": "compose.cli.render",
    "check": "compose.cli.check",
    "proof": "compose.cli.proof",
    "demo": "compose.cli.demo",
}


def handle_errors(func):
    """Turn a ComposeError into one line on stderr and exit code 2 (no traceback)."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            return func(*args, **kwargs)
        except ComposeError as exc:
            click.echo(f"compose: error: {exc}", err=True)
            sys.exit(2)

    return wrapper


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
        return getattr(module, "command")


@click.group(cls=LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="compose",
                      message="%(prog)s %(version)s (distribution compose-maps)")
def cli():
    """Compose layered thematic maps from a TOML style and check their visual hierarchy.

    Not for navigation or safety decisions: the maps are illustrations.
    """


def main(argv=None):
    """Run the command line (used by the console script)."""
    cli.main(args=argv, prog_name="compose")
