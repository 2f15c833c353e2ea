"""compose: layered thematic maps from a declarative style, with a numeric hierarchy check.

The public API (:mod:`compose.api`), imported on first use so ``compose --help`` stays fast::

    style = compose.load_style(path, overrides=None)     # -> Style
    result = compose.render(style, out_dir)              # -> RenderResult (files written)
    report = compose.check(style)                        # -> CheckReport (nothing written)
"""
from __future__ import annotations

import sys
import types

__version__ = "0.1.0"
_API = ("load_style", "render", "check", "Style", "RenderResult", "CheckReport")
__all__ = ["__version__", *_API]


class _Package(types.ModuleType):
    """The package: its API names resolve through :mod:`compose.api` when first used.

    ``compose.check`` stays the checker's package (submodules, patching and ``import ... as``
    work as usual); :mod:`compose.api` makes it callable as :func:`compose.api.check`.
    """

    def __getattribute__(self, name: str):
        if name in _API:
            from compose import api

            return sys.modules["compose.check"] if name == "check" else getattr(api, name)
        return super().__getattribute__(name)


sys.modules[__name__].__class__ = _Package
