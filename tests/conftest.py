"""Shared test helpers. Colour comparisons are made in perceptual units computed by colour-science
(a reference library outside the project), never by the code under test."""
from __future__ import annotations

import os
import warnings

import numpy as np
import pytest

__all__ = ["assert_colors_close", "delta_e00_reference", "angular_difference", "seam_tolerance",
           "cam02ucs_reference"]


def delta_e00_reference(a, b, space: str = "srgb") -> np.ndarray:
    """CIEDE2000 between two colour arrays (..., 3) by colour-science.

    ``space`` is ``"srgb"`` (gamma-encoded floats in [0, 1], converted with colour-science's
    sRGB -> XYZ -> CIELAB defaults, the convention the engine pins) or ``"lab"`` (CIELAB).
    """
    import colour

    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    if space == "srgb":
        a = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(a))
        b = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(b))
    elif space != "lab":
        raise ValueError(f"space must be 'srgb' or 'lab', got {space!r}")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return np.asarray(colour.difference.delta_E_CIE2000(a, b), dtype=float)


def assert_colors_close(a, b, max_delta_e: float = 0.5, space: str = "srgb") -> None:
    """Fail unless every colour of ``a`` is within ``max_delta_e`` CIEDE2000 of ``b``.

    The message names the worst pair, so a failure reads in perceptual units. A ΔE00 of about 1 is
    a just-noticeable difference for large patches (common practice, no source).
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    a, b = np.broadcast_arrays(a, b)
    de = np.atleast_1d(delta_e00_reference(a, b, space))
    worst = int(np.argmax(de))
    if not de.flat[worst] <= max_delta_e:
        fa = a.reshape(-1, 3)[worst]
        fb = b.reshape(-1, 3)[worst]
        raise AssertionError(f"colours differ by dE00 {de.flat[worst]:.6g} > {max_delta_e:g} "
                             f"at index {worst}: {fa.tolist()} vs {fb.tolist()}")


def angular_difference(h1, h2) -> np.ndarray:
    """Smallest absolute difference between two hue angles in degrees, in [0, 180]."""
    d = (np.asarray(h1, dtype=float) - np.asarray(h2, dtype=float)) % 360.0
    return np.minimum(d, 360.0 - d)


def seam_tolerance(rgb, tol: float = 1e-8) -> float:
    """Round-trip tolerance: ``tol``, widened to 5e-8 next to the IEC decode threshold.

    CALC: the published thresholds do not meet exactly -- decode(0.04045) = 0.0031308050 lies just
    above the encode threshold 0.0031308, so encoded values in (0.0404499, 0.04045] come back up to
    3e-8 low (about 1e-5 of an 8-bit code). colour-science moves the decode threshold to 0.0404499 to
    avoid this; we keep the IEC/WCAG 0.04045 (see docs/color.md).
    """
    near = np.any(np.abs(np.abs(np.asarray(rgb, dtype=float)) - 0.04045) < 1e-6)
    return 5e-8 if near else tol


def cam02ucs_reference(rgb) -> np.ndarray:
    """CAM02-UCS J', a', b' of gamma-encoded sRGB (..., 3) computed entirely by colour-science.

    sRGB -> XYZ by colour.sRGB_to_XYZ; CIECAM02 with white = xy D65 (0.3127, 0.3290) scaled to
    Y = 100, L_A = 64/pi/5 cd/m^2, Y_b = 20, average surround (the sRGB viewing conditions of
    references.md §3); then colour.JMh_CIECAM02_to_CAM02UCS (Luo, Cui & Li 2006).
    """
    import colour

    xyz = colour.sRGB_to_XYZ(np.asarray(rgb, dtype=float)) * 100.0
    white = colour.xy_to_XYZ(np.array([0.3127, 0.3290])) * 100.0
    surround = colour.VIEWING_CONDITIONS_CIECAM02["Average"]
    spec = colour.XYZ_to_CIECAM02(xyz, white, 64 / np.pi / 5, 20.0, surround)
    jmh = np.stack([spec.J, spec.M, spec.h], axis=-1)
    return colour.JMh_CIECAM02_to_CAM02UCS(jmh)


def pytest_configure(config):
    """Checks in tests neither read nor write the user's cache of prepared inputs
    (:mod:`compose.check.cache`); tests of the cache pass their own folder."""
    os.environ["COMPOSE_CACHE"] = "off"


def pytest_assertrepr_compare(config, op, left, right):
    """``==`` of two long byte strings (whole files compared for byte identity): their lengths
    and the first offset where they differ, with the bytes around it, instead of pytest's
    line diff of their reprs, which took minutes on files of a few MB (a failure in CI ran
    past ten minutes in difflib before it could be read)."""
    if op != "==" or not isinstance(left, (bytes, bytearray)) \
            or not isinstance(right, (bytes, bytearray)) or max(len(left), len(right)) <= 4096:
        return None
    n = min(len(left), len(right))
    a = np.frombuffer(bytes(left[:n]), np.uint8)
    b = np.frombuffer(bytes(right[:n]), np.uint8)
    differ = np.flatnonzero(a != b)
    first = int(differ[0]) if differ.size else n
    lo, hi = max(first - 16, 0), first + 16
    return [f"byte strings differ: {len(left):,} vs {len(right):,} bytes; "
            f"{differ.size:,} of the first {n:,} bytes differ, the first at offset {first:,}",
            f"left  [{lo}:{hi}] {bytes(left[lo:hi]).hex(' ')}",
            f"right [{lo}:{hi}] {bytes(right[lo:hi]).hex(' ')}"]


@pytest.fixture
def tiny_region(tmp_path):
    """A DEM and a field in EPSG:4326 (degrees), lines and points in EPSG:4326, canvas in UTM
    (EPSG:32630): a 300 x 260 px style of every layer kind, written into ``tmp_path``; returns the
    style's path. Shared by the engine, drawer, parallel and preview tests."""
    import pyproj
    from affine import Affine

    from tests.sources._files import write_raster, write_vector

    UTM = "EPSG:32630"
    lon0, lat0, step = -3.30, 45.00, 0.0008
    y, x = np.mgrid[0:160, 0:200].astype("float32")
    dem = 300 + 200 * np.sin(x / 17.0) * np.cos(y / 23.0) + y * 2
    write_raster(tmp_path / "dem.tif", dem.astype("float32"), crs="EPSG:4326",
                 transform=Affine(step, 0, lon0, 0, -step, lat0))
    field = (x / 200 * 12).astype("float32")
    field[40:60, 50:80] = np.nan
    write_raster(tmp_path / "field.tif", field, crs="EPSG:4326",
                 transform=Affine(step, 0, lon0, 0, -step, lat0), nodata=float("nan"))
    lines = [({"type": "LineString", "coordinates": [(lon0 + 0.01, lat0 - 0.02), (lon0 + 0.15, lat0 - 0.11),
                                                      (lon0 + 0.05, lat0 - 0.12)]}, {"kind": "road"}),
             ({"type": "LineString", "coordinates": [(lon0 + 0.02, lat0 - 0.10), (lon0 + 0.14, lat0 - 0.03)]},
              {"kind": "track"})]
    write_vector(tmp_path / "v.gpkg", lines, crs="EPSG:4326", properties={"kind": "str"}, table="lines")
    towns = [({"type": "Point", "coordinates": (lon0 + 0.03 * i + 0.02, lat0 - 0.02 * i - 0.02)},
              {"name": f"Town{i}", "pop": 100 * i}) for i in range(5)]
    write_vector(tmp_path / "v.gpkg", towns, crs="EPSG:4326", properties={"name": "str", "pop": "int"},
                 table="towns")
    # canvas: a UTM box inside the DEM footprint
    t = pyproj.Transformer.from_crs("EPSG:4326", UTM, always_xy=True)
    x0, y0 = t.transform(lon0 + 0.02, lat0 - 0.115)
    x0, y0 = round(x0 / 30) * 30, round(y0 / 30) * 30
    extent = [x0, y0, x0 + 30 * 300, y0 + 30 * 260]
    style = tmp_path / "tiny.toml"
    style.write_text(f'''
[map]
name = "tiny"
title = "tiny"
crs = "{UTM}"
extent = {extent}
pixel = 30
dpi = 150

[ramp.g]
kind = "sequential"
domain = [0, 12]
through = [{{L = 92, C = 10, h = 95}}, {{L = 55, C = 40, h = 140}}, {{L = 28, C = 20, h = 160}}]

[[layer]]
name = "relief"
role = "ground"
kind = "relief"
source = "dem.tif"
shade = {{ azimuth = 315, altitude = 45, exaggeration = 3 }}

[[layer]]
name = "field"
role = "theme"
kind = "field"
source = "field.tif"
ramp = "g"
blend = "multiply"

[[layer]]
name = "roads"
role = "overlay"
kind = "lines"
source = "v.gpkg"
table = "lines"
stroke = "#303030"
width = 1.2
dash = [4, 2]
halo = {{ color = "#ffffff", width = 3 }}

[[layer]]
name = "names"
role = "overlay"
kind = "labels"
source = "v.gpkg"
table = "towns"
text = "name"
priority = "pop"
size = 7
halo = {{ color = "#ffffff", width = 1.5 }}
''')
    return style
