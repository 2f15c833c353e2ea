"""Modules loaded when first used instead of when imported (the standard library's
``importlib.util.LazyLoader``): for parts of the drawing libraries that other modules import
with themselves but that a render uses only in cases it rarely meets (TeX's DVI reader, the
TrueType font subsetter)."""
from __future__ import annotations

import importlib.util
import sys

__all__ = ["on_first_use"]


def on_first_use(name: str) -> None:
    """Put module ``name`` (a dotted name) into ``sys.modules`` as a module whose code runs when
    one of its attributes is first looked up; nothing when it is loaded already or cannot be
    found (its importer then reports it as usual). Its parent package is imported now."""
    if name in sys.modules:
        return
    try:
        spec = importlib.util.find_spec(name)
    except ImportError:                                # pragma: no cover - reported on use
        return
    if spec is None or spec.loader is None:            # pragma: no cover
        return
    spec.loader = importlib.util.LazyLoader(spec.loader)
    module = importlib.util.module_from_spec(spec)
    sys.modules[name] = module
    spec.loader.exec_module(module)
    parent, _, child = name.rpartition(".")
    if parent:
        setattr(sys.modules[parent], child, module)
