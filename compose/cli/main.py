"""Entry point of the `compose` command: a click group; each subcommand lives in its own module."""
from __future__ import annotations

import importlib
import os
import sys

import click

from compose import __version__
from compose.cli.failure import guarded, set_debug

__all__ = ["main", "cli", "handle_errors"]

# numpy's OpenBLAS starts a thread per core when numpy is imported, and they spin for a while
# (about 0.1-0.15 CPU-s per process here); compose multiplies only 3 x 3 colour matrices and
# runs its own threads, so the command (and the processes it starts) keeps BLAS to one thread
# unless the user set it. Set before anything imports numpy (nothing above does).
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

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


def main(argv=None):
    """Run the command line (used by the console script).

    Called without ``argv`` (the console script, or ``python -c "...; main()"``), it ends the
    process itself once the command returns: atexit functions run, stdout and stderr flushed,
    then :func:`os._exit` with the command's exit code, which skips the interpreter tearing down
    every loaded module (0.15-0.4 s after a render has loaded the geodata and drawing
    libraries). Every output is closed and renamed into place by then. With ``argv`` (tests,
    callers in Python) it returns or raises ``SystemExit`` as usual."""
    if argv is not None:
        cli.main(args=argv, prog_name="compose")
        return
    try:
        cli.main(prog_name="compose")
        code = 0
    except SystemExit as exc:
        code = _exit_code(exc.code)
    _end_process(code)


def _exit_code(code) -> int:
    """What ``sys.exit(code)`` makes the process's status (a message goes to stderr as 1)."""
    if code is None:
        return 0
    if isinstance(code, int):
        return code
    try:
        sys.stderr.write(f"{code}\n")
    except (OSError, ValueError):
        pass
    return 1


def _end_process(code: int) -> None:
    import atexit

    atexit._run_exitfuncs()
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):       # closed or a broken pipe: nothing more to say
            pass
    os._exit(code)
