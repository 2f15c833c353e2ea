"""The compiled loops of the window statistics (``compose._kernels``, a small C extension built
from ``compose/_kernels.c`` by setup.py), loaded on first use.

The extension reads arrays through Python's buffer protocol only and gives the same numbers
as :mod:`compose.measure`'s numpy path, bit for bit (``tests/test_kernels.py`` compares them).
When it was not built (a source tree used without installing, a build without a C compiler)
or ``COMPOSE_KERNELS=off`` is set, :func:`get` returns None and the numpy path runs instead.
"""
from __future__ import annotations

import os
from types import ModuleType

__all__ = ["get", "enabled"]

_loaded: list[ModuleType | None] = []
#: False: :func:`get` returns None (the numpy path), e.g. to compare the two in one process
enabled = os.environ.get("COMPOSE_KERNELS", "on").strip().lower() not in ("off", "0", "no")


def get() -> ModuleType | None:
    """The extension module, or None when it is missing or turned off."""
    if not enabled:
        return None
    if not _loaded:
        try:
            from compose import _kernels  # type: ignore[attr-defined]
        except ImportError:
            _loaded.append(None)
        else:
            _loaded.append(_kernels)
    return _loaded[0]
