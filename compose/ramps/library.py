"""The ramp library that ships with compose (``compose/ramps/library.toml``, package data).

Every style can name a library ramp without defining it; a style's own ``[ramp.NAME]`` replaces
the library ramp of that name. :func:`compose.style.load.library_tables` reads the file once per
process (a style file without a map, read by the style loader); :func:`with_library` completes
a style's ramp tables with the library ramps it uses (named by a
layer, or the base of a twin), so only those are built and checked.
"""
from __future__ import annotations

from collections.abc import Iterable, Mapping
from pathlib import Path
from types import MappingProxyType
from typing import Any

__all__ = ["LIBRARY_FILE", "library_path", "with_library"]

#: The library's file name inside the ``compose.ramps`` package.
LIBRARY_FILE = "library.toml"


def library_path() -> Path:
    """The library file as installed: beside this module (a real file: the package is installed
    unzipped; importlib.resources, which would find it in a zip too, is 5 ms of every command's
    start-up)."""
    return Path(__file__).resolve().with_name(LIBRARY_FILE)


def with_library(own: Mapping[str, Any], wanted: Iterable[str],
                 library: Mapping[str, Any]) -> Mapping[str, Any]:
    """``own`` ramp tables plus the ``library`` ramp tables named in ``wanted`` that ``own``
    lacks, and the twin bases those (and ``own``'s twins) need, transitively. Own ramps come
    first, in order; unknown names are left for the caller to report."""
    out = dict(own)
    pending = [n for n in wanted if n not in out]
    pending += [str(t.table["twin"]) for t in own.values() if "twin" in t.table]
    while pending:
        name = pending.pop()
        if name in out or name not in library:
            continue
        table = library[name]
        out[name] = table
        if "twin" in table.table:
            pending.append(str(table.table["twin"]))
    return MappingProxyType(out)
