"""Agg, the antialiased rasteriser the vector layers draw with: matplotlib's C++ renderer
(``matplotlib.backends._backend_agg``) loaded on its own, and the path it draws.

Importing matplotlib's package loads its configuration (rcParams and their validators, the font
configuration parser, colour tables, Pillow): about 0.15 CPU-s, more than a draft check of 10,000
lines spends drawing them. The renderer's extension module needs none of it: it reads a path
from any object's ``vertices``, ``codes``, ``should_simplify`` and ``simplify_threshold`` and a
graphics context from its attributes (:mod:`compose.layers.draw`). So the module is loaded from
its file under its own name (:func:`renderer_class`): a later import of matplotlib's Agg backend
(the page, the ramp figure) finds that same module instead of loading a second copy. Text needs
matplotlib's fonts and imports the package where it is measured.
"""
from __future__ import annotations

import functools
import sys
import threading

import numpy as np

__all__ = ["Path", "renderer_class", "extension", "load_alone", "package_folder"]

_AGG = "matplotlib.backends._backend_agg"


class Path:
    """A path as Agg draws it: ``vertices`` float64 (N, 2), ``codes`` uint8 (N,) or None
    (matplotlib's path codes, :attr:`MOVETO` ...), never simplified by Agg -- the subset of
    ``matplotlib.path.Path`` the renderer reads, with its constructor's checks.
    ``readonly``: the arrays are made read-only."""

    __slots__ = ("vertices", "codes", "should_simplify", "simplify_threshold")

    STOP, MOVETO, LINETO, CURVE3, CURVE4, CLOSEPOLY = 0, 1, 2, 3, 4, 79
    code_type = np.uint8

    def __init__(self, vertices, codes=None, readonly: bool = False) -> None:
        v = np.asarray(vertices, np.float64)
        if v.ndim != 2 or v.shape[1] != 2:
            raise ValueError(f"vertices must be (N, 2), not {v.shape}")
        c = None
        if codes is not None:
            c = np.asarray(codes, self.code_type)
            if c.ndim != 1 or len(c) != len(v):
                raise ValueError("codes must be 1-D and as long as the vertices")
            if len(c) and c[0] != self.MOVETO:
                raise ValueError("the first code must be MOVETO")
        if readonly:
            v.flags.writeable = False
            if c is not None:
                c.flags.writeable = False
        self.vertices = v
        self.codes = c
        self.should_simplify = False
        self.simplify_threshold = 1.0 / 9.0    # matplotlib's default (unused: no simplifying)

    def __len__(self) -> int:
        return len(self.vertices)


_FIRST = threading.Lock()


@functools.lru_cache(maxsize=1)
def renderer_class() -> type:
    """matplotlib's ``RendererAgg`` (width, height, dpi), its extension module loaded without
    the matplotlib package when that is not imported yet (and registered under its own name).

    Thread-safe: the first call loads the module and uses a renderer once (draws, reads its
    buffer) while any other thread's first call waits. Window threads that met the renderer for
    the first time at once sometimes found its buffer protocol broken for the rest of the process
    (``BufferError: pybind11_getbuffer(): Internal error``: about 1 render in 10 of the coast
    style with ``--workers 2``, 6 in 10 processes whose 4 threads drew their first label at once;
    matplotlib 3.11's pybind11 extension; never after one use in a single thread)."""
    with _FIRST:
        module = extension(_AGG)
        renderer = module.RendererAgg(2, 2, 72.0)
        memoryview(renderer).release()
        renderer.clear()
        return module.RendererAgg


def extension(name: str):
    """matplotlib's extension module ``name``: the one imported already, else loaded from its
    file without the package (:func:`load_alone`) while matplotlib is not imported, else
    imported with the package."""
    module = sys.modules.get(name)
    if module is None and "matplotlib" not in sys.modules:
        module = load_alone(name)
    if module is None:
        import importlib

        module = importlib.import_module(name)
    return module


def package_folder():
    """matplotlib's package folder (a pathlib.Path), found without importing it; None when
    matplotlib is not installed."""
    import importlib.util
    from pathlib import Path as FilePath

    try:
        spec = importlib.util.find_spec("matplotlib")
    except (ImportError, ValueError):
        return None
    if spec is None or not spec.submodule_search_locations:
        return None
    return FilePath(next(iter(spec.submodule_search_locations)))


def load_alone(name: str):
    """matplotlib's extension module ``name`` (e.g. ``"matplotlib.ft2font"``) loaded from its
    file in matplotlib's folder, found without importing the package, and registered under its
    own name (a later import of matplotlib finds that same module); None when it cannot be (then
    matplotlib's own import is used)."""
    import importlib.machinery
    import importlib.util

    folder = package_folder()
    if folder is None:
        return None
    *inner, stem = name.split(".")[1:]
    folder = folder.joinpath(*inner)
    for suffix in importlib.machinery.EXTENSION_SUFFIXES:
        file = folder / f"{stem}{suffix}"
        if file.is_file():
            break
    else:
        return None
    try:
        loader = importlib.machinery.ExtensionFileLoader(name, str(file))
        spec = importlib.util.spec_from_file_location(name, file, loader=loader)
        if spec is None:
            return None
        module = importlib.util.module_from_spec(spec)
        loader.exec_module(module)
    except (ImportError, OSError):
        return None
    sys.modules[name] = module
    return module
