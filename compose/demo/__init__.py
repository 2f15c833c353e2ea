"""Where the demo lives: the example styles and the invented demo region.

In a checkout they are ``styles/`` and ``demo_region/`` beside the package; an installed
distribution carries them inside it as ``compose/demo/styles`` and ``compose/demo/demo_region``
(see setup.py). Either way the styles find their data through ``../demo_region/`` paths.
"""
from __future__ import annotations

from pathlib import Path

from compose.errors import ComposeError

__all__ = ["demo_folders", "styles_dir", "region_dir"]

_HERE = Path(__file__).resolve().parent


def demo_folders() -> tuple[Path, Path]:
    """(styles folder, demo region folder); raises ComposeError naming where it looked."""
    places = [(_HERE / "styles", _HERE / "demo_region"),
              (_HERE.parents[1] / "styles", _HERE.parents[1] / "demo_region")]
    for styles, region in places:
        if (styles / "base.toml").is_file() and (region / "elevation.tif").is_file():
            return styles, region
    looked = ", ".join(str(s) for s, _ in places)
    raise ComposeError(f"the demo styles and region are not installed (looked in {looked}); "
                       "reinstall compose-maps")


def styles_dir() -> Path:
    """The folder of the demo styles."""
    return demo_folders()[0]


def region_dir() -> Path:
    """The folder of the invented demo region's rasters and vectors."""
    return demo_folders()[1]
