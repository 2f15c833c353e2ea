"""Colour mathematics over arrays of shape (..., 3). Depends on nothing else of ours.

Convention (one for the whole engine): IEC 61966-2-1 sRGB transfer function and 4-digit matrix,
CIELAB with the D65 white from x, y = 0.3127, 0.3290; sRGB values are gamma-encoded floats in
[0, 1]. See the module docstrings for units.
"""
from compose.color.bulk import color_counts, lab_of_packed, lch_of_packed, pack_rgb8, srgb8_to_lch, unpack_rgb8
from compose.color.cam import cam02ucs_to_srgb, cam02ucs_to_xyz, srgb_to_cam02ucs, xyz_to_cam02ucs
from compose.color.cvd import CVD_KINDS, cvd_matrix, simulate_cvd, simulate_cvd_linear
from compose.color.difference import delta_e_76, delta_e_2000, delta_e_cam02ucs
from compose.color.gamut import in_gamut, lch_in_gamut, map_to_gamut, max_chroma
from compose.color.lab import (
                               WHITE_D65,
                               lab_to_lch,
                               lab_to_srgb,
                               lab_to_xyz,
                               lch_to_lab,
                               lch_to_srgb,
                               srgb_to_lab,
                               srgb_to_lch,
                               xyz_to_lab,
)
from compose.color.parse import describe, parse_color, to_hex, to_rgb8
from compose.color.srgb import linear_to_srgb, linear_to_xyz, srgb_to_linear, srgb_to_xyz, xyz_to_linear, xyz_to_srgb
from compose.color.wcag import contrast_from_luminance, contrast_ratio, relative_luminance

__all__ = [
    "color_counts", "lab_of_packed", "lch_of_packed", "pack_rgb8", "srgb8_to_lch", "unpack_rgb8",
    "cam02ucs_to_srgb", "cam02ucs_to_xyz", "srgb_to_cam02ucs", "xyz_to_cam02ucs",
    "CVD_KINDS", "cvd_matrix", "simulate_cvd", "simulate_cvd_linear",
    "delta_e_76", "delta_e_2000", "delta_e_cam02ucs",
    "in_gamut", "lch_in_gamut", "map_to_gamut", "max_chroma",
    "WHITE_D65", "lab_to_lch", "lab_to_srgb", "lab_to_xyz", "lch_to_lab", "lch_to_srgb",
    "srgb_to_lab", "srgb_to_lch", "xyz_to_lab",
    "describe", "parse_color", "to_hex", "to_rgb8",
    "linear_to_srgb", "linear_to_xyz", "srgb_to_linear", "srgb_to_xyz", "xyz_to_linear", "xyz_to_srgb",
    "contrast_from_luminance", "contrast_ratio", "relative_luminance",
]
