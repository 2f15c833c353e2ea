"""Entry point of the `compose` command: :func:`main`. The click group (:data:`cli`) and
:func:`handle_errors` live in :mod:`compose.cli.group` and are importable from here; this module
imports neither click nor the group before it needs them, so ``compose check --draft`` forks its
marks process first (:func:`compose.layers.early_marks.start_command`: the parent imports click
and the command beside that process, not before it)."""
from __future__ import annotations

import os
import sys
from typing import Any

__all__ = ["main"]      # and cli, handle_errors: compose.cli.group's

# numpy's OpenBLAS starts a thread per core when numpy is imported, and they spin for a while
# (about 0.1-0.15 CPU-s per process here); compose multiplies only 3 x 3 colour matrices and
# runs its own threads, so the command (and the processes it starts) keeps BLAS to one thread
# unless the user set it. Set before anything imports numpy (nothing above does).
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")


def __getattr__(name: str) -> Any:
    if name in ("cli", "handle_errors", "LazyGroup", "COMMANDS"):
        from compose.cli import group

        return getattr(group, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def main(argv=None):
    """Run the command line (used by the console script).

    Called without ``argv`` (the console script, or ``python -c "...; main()"``), it ends the
    process itself once the command returns: atexit functions run, stdout and stderr flushed,
    then :func:`os._exit` with the command's exit code, which skips the interpreter tearing down
    every loaded module (0.15-0.4 s after a render has loaded the geodata and drawing
    libraries). Every output is closed and renamed into place by then. With ``argv`` (tests,
    callers in Python) it returns or raises ``SystemExit`` as usual."""
    if argv is None and sys.argv[1:2] == ["check"] and "--draft" in sys.argv:
        from compose.layers.early_marks import start_command

        start_command(sys.argv[2:])
    from compose.cli.group import cli

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
