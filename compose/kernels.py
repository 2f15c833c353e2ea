"""The compiled loops of the window task (``compose._kernels``, a small C extension built from
``compose/_kernels.c`` by setup.py), loaded on first use: the window statistics
(:mod:`compose.measure`), a lookup table's colours composited (:mod:`compose.composite`), the
8-bit conversion (:mod:`compose.engine`) and the hillshade
(:mod:`compose.layers.hillshade`).

The extension reads arrays through Python's buffer protocol only and gives the same numbers
as the numpy paths, bit for bit (``tests/test_kernels.py`` compares them).
When it was not built (a source tree used without installing, a build without a C compiler)
or ``COMPOSE_KERNELS=off`` is set, :func:`get` returns None and the numpy path runs instead.
"""
from __future__ import annotations

import os
from types import ModuleType

__all__ = ["get", "enabled", "state"]

_loaded: list[ModuleType | None] = []
#: False: :func:`get` returns None (the numpy path), e.g. to compare the two in one process
enabled = os.environ.get("COMPOSE_KERNELS", "on").strip().lower() not in ("off", "0", "no")


def get() -> ModuleType | None:
    """The extension module, or None when it is missing, turned off or older than its source."""
    if not enabled:
        return None
    if not _loaded:
        try:
            from compose import _kernels  # type: ignore[attr-defined]
        except ImportError:
            _loaded.append(None)
        else:
            _loaded.append(None if stale(_kernels.__file__) else _kernels)
    return _loaded[0]


def state(refuse_stale: bool = False) -> str:
    """Which loops run, in words: ``"compiled"``, or ``"numpy: ..."`` and why (turned off,
    not built, or ``"numpy: stale build ..."`` when the built module is older than its source).
    ``refuse_stale``: raise SystemExit on a stale build instead (the benchmarks: their figures
    would be the numpy path's, not the build's)."""
    if not enabled:
        return "numpy: turned off by COMPOSE_KERNELS"
    try:
        from compose import _kernels  # type: ignore[attr-defined]
    except ImportError:
        return "numpy: compose._kernels is not built"
    if stale(_kernels.__file__):
        why = "numpy: stale build, older than compose/_kernels.c (pip install -e . or make)"
        if refuse_stale:
            raise SystemExit(f"refusing to measure the {why}")
        return why
    return "compiled"


def stale(built: str) -> bool:
    """True when ``compose/_kernels.c`` lies beside the built module ``built`` and was changed
    after it: an editable install builds the extension into the source tree once, so a checkout
    that changes the C source would otherwise run the old loops (or miss a new one). Then the
    numpy path runs and one line on stderr says how to build again. An installed package ships no
    C source: never stale."""
    import sys
    from pathlib import Path

    source = Path(built).with_name("_kernels.c")
    try:
        if source.stat().st_mtime <= Path(built).stat().st_mtime:
            return False
    except OSError:
        return False
    print(f"compose: {built} is older than {source}; using the slower numpy path "
          "(build again: pip install -e . or make)", file=sys.stderr)
    return True
