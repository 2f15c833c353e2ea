"""Shared helpers for the ramp tests: building ramps from inline tables, and reference colour
measurements made with colour-science (never with compose.color), applied to 8-bit hex colours.

Reference library: colour-science 0.4.x --
* sRGB (IEC 61966-2-1) -> XYZ: ``colour.sRGB_to_XYZ``; CIELAB under D65 (CIE 15):
  ``colour.XYZ_to_Lab`` (default illuminant D65, xy 0.3127, 0.3290); LCh: ``colour.Lab_to_LCHab``;
* CIEDE2000 (CIE S 014-6, Sharma, Wu & Dalal 2005): ``colour.delta_E(..., method="CIE 2000")``;
* CVD, Machado, Oliveira & Fernandes (2009): ``colour.matrix_cvd_Machado2009`` at severity 1,
  applied to linear RGB and clipped (references.md section 4);
* CAM02-UCS (Luo, Cui & Li 2006): ``colour.XYZ_to_CAM02UCS`` with its sRGB viewing defaults.
"""
from __future__ import annotations

import tomllib
import warnings
from collections import namedtuple
from pathlib import Path

import colour
import numpy as np
import pytest

from compose.ramps import build_ramps

ROOT = Path(__file__).resolve().parents[2]
LIBRARY = ROOT / "compose" / "ramps" / "library.toml"
POOR = ROOT / "styles" / "poor-ramps.toml"

Table = namedtuple("Table", "name table path")
CVD_NAMES = {"deutan": "Deuteranomaly", "protan": "Protanomaly", "tritan": "Tritanomaly"}


def make(path: str = "styles/test.toml", **tables):
    """Build ramps from keyword tables (ramp names with '-' written as '_')."""
    named = {k.replace("_", "-"): v for k, v in tables.items()}
    return build_ramps({n: Table(n, t, Path(path)) for n, t in named.items()})


def lch(L, C, h):
    return {"L": L, "C": C, "h": h}


# --- reference measurements (colour-science) ----------------------------------------------------

def hex_to_rgb8(codes) -> np.ndarray:
    return np.array([[int(c[i:i + 2], 16) for i in (1, 3, 5)] for c in codes], dtype=float)


def ref_lab(rgb8) -> np.ndarray:
    """CIELAB (D65) of 8-bit sRGB colours, by colour-science."""
    return colour.XYZ_to_Lab(colour.sRGB_to_XYZ(np.asarray(rgb8, dtype=float) / 255.0))


def ref_lch(rgb8) -> np.ndarray:
    return colour.Lab_to_LCHab(ref_lab(rgb8))


def ref_de00(lab1, lab2) -> np.ndarray:
    return colour.delta_E(lab1, lab2, method="CIE 2000")


def ref_cvd_lab(rgb8, kind: str) -> np.ndarray:
    """CIELAB of 8-bit colours as seen under ``kind`` CVD at severity 100 %, by colour-science."""
    lin = colour.models.eotf_sRGB(np.asarray(rgb8, dtype=float) / 255.0)
    with warnings.catch_warnings():   # colour-science's caveat on tritan: references.md section 4
        warnings.simplefilter("ignore", colour.utilities.ColourUsageWarning)
        matrix = colour.matrix_cvd_Machado2009(CVD_NAMES[kind], 1.0)
    sim = np.clip(lin @ matrix.T, 0.0, 1.0)
    return colour.XYZ_to_Lab(colour.sRGB_to_XYZ(colour.models.eotf_inverse_sRGB(sim)))


def ref_vision_lab(rgb8, vision: str) -> np.ndarray:
    return ref_lab(rgb8) if vision == "normal" else ref_cvd_lab(rgb8, vision)


def ref_min_pairwise(lab) -> float:
    d = ref_de00(lab[:, None, :], lab[None, :, :])
    return float(np.min(d[np.triu_indices(len(lab), 1)]))


def ref_step_cv(rgb) -> float:
    """CV (%) of CAM02-UCS distances between consecutive sRGB colours (floats 0-1)."""
    ucs = colour.XYZ_to_CAM02UCS(colour.sRGB_to_XYZ(np.asarray(rgb, dtype=float)))
    step = np.linalg.norm(np.diff(ucs, axis=0), axis=-1)
    return float(100 * step.std() / step.mean())


def rgb8_of(ramp, values) -> np.ndarray:
    """The 8-bit colours a ramp's default lookup table draws at ``values``."""
    lut = ramp.lut()
    return lut.rgb8[lut.index(np.asarray(values, dtype=float))].astype(float)


# --- style loading --------------------------------------------------------------------------------

def _tiny_loader(path: Path) -> dict:
    """Temporary stand-in for compose.style.load_style (only if it is missing): extends + ramps."""
    data = tomllib.loads(path.read_text())
    ramps: dict = {}
    if "extends" in data:
        ramps.update(_tiny_loader((path.parent / data["extends"]).resolve()))
    for name, table in data.get("ramp", {}).items():
        merged = dict(ramps[name].table) if name in ramps else {}
        merged.update(table)
        ramps[name] = Table(name, merged, path)
    return ramps


def style_ramps(path: Path) -> dict:
    """The ramp tables of a style, through compose.style.load_style when it exists."""
    try:
        from compose.style import load_style
    except ImportError:
        return _tiny_loader(Path(path))
    return load_style(path, require_map=False).ramps


@pytest.fixture(scope="session")
def library():
    """The built library ramps of compose/ramps/library.toml."""
    return build_ramps(style_ramps(LIBRARY))
