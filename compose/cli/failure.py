"""How a command ends: exit codes, one line on stderr, no traceback, no library noise.

Exit codes (README "Exit codes"):

====  ===========================================================================
0     done; every check rule passed (warnings allowed)
1     done, but a check rule failed (``compose check``, ``compose render``)
2     bad input: the style, a data file, an option or the output folder (one line
      naming the file and the style key)
3     compose itself failed (a bug or an exhausted machine): one line and where to
      report it; ``COMPOSE_DEBUG=1`` or ``compose --debug`` adds the traceback
130   interrupted (SIGINT, Ctrl-C); 143 terminated (SIGTERM). Outputs are left as
      they were before the run.
====  ===========================================================================

Library warnings (GDAL through rasterio and fiona, numpy, matplotlib) are collected while a
command runs and shown only with ``--debug``, so nothing reaches stderr before the error line.
Every echoed message is one line: control, format and bidirectional characters are escaped
and a very long message is shortened.
"""
from __future__ import annotations

import contextlib
import errno
import functools
import logging
import os
import signal
import sys
import traceback
import unicodedata
import warnings
from collections.abc import Callable, Iterator
from typing import Any

__all__ = ["EXIT_OK", "EXIT_RULE_FAILED", "EXIT_BAD_INPUT", "EXIT_PROGRAM_FAILED",
           "EXIT_INTERRUPTED", "EXIT_TERMINATED", "REPORT_HINT", "Terminated", "one_line",
           "debug_enabled", "set_debug", "guarded", "quiet_libraries", "signals_as_exceptions"]

EXIT_OK = 0
EXIT_RULE_FAILED = 1
EXIT_BAD_INPUT = 2
EXIT_PROGRAM_FAILED = 3
EXIT_INTERRUPTED = 130      # 128 + SIGINT, the shell's convention
EXIT_TERMINATED = 143       # 128 + SIGTERM

#: Where to report a failure of compose itself (README "Reporting a problem").
REPORT_HINT = ("this is a fault in compose, not in your style: please report it with the style, "
               "the command and this line (see README, 'Reporting a problem'); "
               "COMPOSE_DEBUG=1 shows the traceback")

#: A message longer than this many characters is shortened in the middle.
MAX_MESSAGE = 600

_DEBUG = False


class Terminated(BaseException):
    """Raised in the main thread when SIGTERM arrives, so cleanup (``finally``) runs."""


def set_debug(on: bool) -> None:
    """Turn traceback and library-warning output on (``compose --debug``)."""
    global _DEBUG
    _DEBUG = bool(on)


def debug_enabled() -> bool:
    """True when ``--debug`` was given or the environment sets ``COMPOSE_DEBUG`` to a non-empty,
    non-zero value."""
    return _DEBUG or os.environ.get("COMPOSE_DEBUG", "") not in ("", "0")


def _escape_char(ch: str) -> str:
    code = ord(ch)
    if ch == "\n":
        return "\\n"
    if ch == "\t":
        return "\\t"
    if ch == "\r":
        return "\\r"
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}" if code < 0x10000 else f"\\U{code:08x}"


def one_line(text: Any, limit: int = MAX_MESSAGE) -> str:
    """``text`` as one printable line: control (Cc), format (Cf: bidi overrides, zero-width
    characters), line and paragraph separators and lone surrogates escaped as ``\\xNN`` /
    ``\\uNNNN``; longer than ``limit`` characters -> the start and end joined by `` ... ``."""
    out = []
    for ch in str(text):
        cat = unicodedata.category(ch)
        out.append(_escape_char(ch) if cat in ("Cc", "Cf", "Zl", "Zp", "Cs", "Co", "Cn") else ch)
    line = "".join(out)
    if len(line) > limit:
        keep = (limit - 5) // 2
        line = f"{line[:keep]} ... {line[-keep:]}"
    return line


def _echo(line: str) -> None:
    stream = sys.stderr
    try:
        stream.write(line + "\n")
        stream.flush()
    except (OSError, ValueError):    # stderr closed or a broken pipe: nothing more to say
        pass


def _describe(exc: BaseException) -> str:
    text = str(exc).strip()
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


@contextlib.contextmanager
def quiet_libraries() -> Iterator[None]:
    """Keep warnings (``warnings`` module and ``logging`` records) of libraries off stderr while
    the block runs; with debug on they are shown as usual."""
    if debug_enabled():
        logging.basicConfig(level=logging.WARNING, stream=sys.stderr)
        yield
        return
    # GDAL prints errors raised outside rasterio's handlers straight to stderr unless told to
    # log elsewhere; read once, when GDAL first reports
    os.environ.setdefault("CPL_LOG", os.devnull)
    root = logging.getLogger()
    sink = logging.NullHandler()
    root.addHandler(sink)           # no handler -> logging's last resort prints to stderr
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            with _numpy_quiet():
                yield
    finally:
        root.removeHandler(sink)


@contextlib.contextmanager
def _numpy_quiet() -> Iterator[None]:
    np = sys.modules.get("numpy")
    if np is None:
        yield
        return
    with np.errstate(all="ignore"):
        yield


#: the signal (SIGINT or SIGTERM) received during the guarded command, if any: an exception it
#: raises inside a library's own start-up (a C extension's import turns it into ImportError
#: "initialization failed") is still reported as the interruption it is, not as a fault
_received: int | None = None


def _on_sigterm(signum, frame):  # pragma: no cover - exercised by a subprocess test
    global _received
    _received = signum
    raise Terminated()


def _on_sigint(signum, frame):  # pragma: no cover - exercised by a subprocess test
    global _received
    _received = signum
    raise KeyboardInterrupt


def _signalled() -> int | None:
    """The exit code of a signal received during the command (130, 143), else None."""
    if _received == signal.SIGINT:
        return EXIT_INTERRUPTED
    if _received == signal.SIGTERM:
        return EXIT_TERMINATED
    return None


@contextlib.contextmanager
def signals_as_exceptions() -> Iterator[None]:
    """While the block runs, SIGTERM raises :class:`Terminated` (SIGINT already raises
    KeyboardInterrupt), so temporary outputs are removed by the usual cleanup."""
    global _received
    _received = None
    try:
        previous = signal.signal(signal.SIGTERM, _on_sigterm)
    except ValueError:              # not the main thread (e.g. a test runner's worker)
        yield
        return
    interrupt = signal.getsignal(signal.SIGINT)
    ours = interrupt is signal.default_int_handler     # leave a caller's own handler alone
    if ours:
        signal.signal(signal.SIGINT, _on_sigint)
    try:
        yield
    finally:
        signal.signal(signal.SIGTERM, previous)
        if ours:
            signal.signal(signal.SIGINT, interrupt)


def _exit(code: int) -> None:
    sys.exit(code)


#: errno values of an output that cannot be written: disk full, quota, read-only, file too big
_WRITE_ERRNOS = {errno.ENOSPC, errno.EDQUOT, errno.EROFS, errno.EFBIG}


def _disk_full(exc: BaseException) -> bool:
    text = str(exc).lower()
    return "no space left" in text or "free disk space" in text


def _from_data_library(exc: BaseException) -> bool:
    """True for an exception of a data library (rasterio, fiona, pyogrio): a damaged, vanished
    or unwritable file found while reading or writing."""
    return type(exc).__module__.split(".")[0] in ("rasterio", "fiona", "pyogrio")


def guarded(func: Callable) -> Callable:
    """Decorator for a command: map every way it can end to an exit code and one line.

    ComposeError -> 2 (its message); MemoryError and RecursionError and any other exception ->
    3 with :data:`REPORT_HINT`; KeyboardInterrupt -> 130; SIGTERM -> 143. ``SystemExit`` and
    click's own exceptions pass through unchanged.
    """
    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        import click

        from compose.errors import ComposeError

        try:
            with signals_as_exceptions(), quiet_libraries():
                return func(*args, **kwargs)
        except (SystemExit, click.exceptions.ClickException, click.exceptions.Abort,
                click.exceptions.Exit):
            raise
        except KeyboardInterrupt:
            _echo("compose: interrupted; outputs left as they were")
            _exit(EXIT_INTERRUPTED)
        except Terminated:
            _echo("compose: terminated; outputs left as they were")
            _exit(EXIT_TERMINATED)
        except Exception as exc:
            if debug_enabled():
                traceback.print_exc()
            code = _signalled()
            if code is not None:    # whatever the signal broke on its way out: still the signal
                _echo("compose: interrupted; outputs left as they were" if code == EXIT_INTERRUPTED
                      else "compose: terminated; outputs left as they were")
                _exit(code)
            if isinstance(exc, ComposeError):
                _echo(f"compose: error: {one_line(exc)}")
                _exit(EXIT_BAD_INPUT)
            if isinstance(exc, MemoryError):
                _echo("compose: failed: out of memory; try a smaller canvas (map.pixel, "
                      "map.extent) or fewer layers")
                _exit(EXIT_PROGRAM_FAILED)
            if isinstance(exc, OSError) and exc.errno in _WRITE_ERRNOS:
                _echo(f"compose: error: cannot write outputs: {one_line(exc.strerror or exc)}; "
                      f"nothing was replaced")
                _exit(EXIT_BAD_INPUT)
            if _from_data_library(exc) and _disk_full(exc):
                _echo("compose: error: cannot write outputs: no space left on the device; "
                      "nothing was replaced")
                _exit(EXIT_BAD_INPUT)
            if _from_data_library(exc):     # a file the checks before opening could not vet
                _echo(f"compose: error: cannot read or write data: {one_line(exc, 400)}")
                _exit(EXIT_BAD_INPUT)
            _echo(f"compose: failed: {one_line(_describe(exc), 300)}; {REPORT_HINT}")
            _exit(EXIT_PROGRAM_FAILED)

    return wrapper
