"""The options that set a run's limits (:mod:`compose.limits`): ``--max-pixels`` and
``--allow-remote``, shared by every command that reads a style's data."""
from __future__ import annotations

import functools
from collections.abc import Callable

import click

from compose.limits import DEFAULT_MAX_PIXELS, use_limits

__all__ = ["limit_options"]


def limit_options(func: Callable) -> Callable:
    """Add ``--max-pixels`` and ``--allow-remote`` to a click command; its body runs under them."""

    @functools.wraps(func)
    def wrapper(*args, max_pixels: int, allow_remote: bool, **kwargs):
        with use_limits(max_pixels=max_pixels, allow_remote=allow_remote):
            return func(*args, **kwargs)

    wrapper = click.option(
        "--allow-remote", is_flag=True,
        help="Also read remote and virtual sources: URLs, /vsi* paths, VRT and tile-service "
             "files (off by default: a style reads only the local files it names).")(wrapper)
    wrapper = click.option(
        "--max-pixels", type=click.IntRange(min=1), default=DEFAULT_MAX_PIXELS, show_default=True,
        help="Refuse a canvas of more pixels (width x height) before any work starts.")(wrapper)
    return wrapper
