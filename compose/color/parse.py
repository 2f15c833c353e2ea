"""Colour strings and tables of a style file -> gamma-encoded sRGB.

Accepted: ``"#rrggbb"`` and ``"#rgb"`` (CSS Color 4 hex notation), the 148 CSS Color 4 named
colours (``"steelblue"``, case-insensitive; :mod:`compose.color.css_names`) and an inline table
``{L = .., C = .., h = ..}`` in CIE LCh(ab) under D65 (L* 0-100, C*ab >= 0, h degrees).
An LCh colour sRGB cannot show is an error naming the largest chroma that fits, never clipped.
"""
from __future__ import annotations

import re
from collections.abc import Mapping

import numpy as np

from compose.color.css_names import css_named_color
from compose.color.gamut import lch_in_gamut, max_chroma
from compose.color.lab import lch_to_srgb, srgb_to_lch
from compose.errors import ColorError

__all__ = ["parse_color", "to_hex", "to_rgb8", "describe"]

_HEX = re.compile(r"^#([0-9a-fA-F]{6}|[0-9a-fA-F]{3})$")


def parse_color(value, where: str = "color") -> tuple[float, float, float]:
    """Parse a colour of a style file to gamma-encoded sRGB floats in [0, 1].

    ``where`` names the place for the error message, e.g. ``'layer "coast": stroke'``.
    Raises :class:`ColorError` with a one-line message naming ``where`` and the value.
    """
    if isinstance(value, str):
        m = _HEX.match(value.strip())
        named = None if m else css_named_color(value)
        if named is not None:
            return named
        if not m:
            import difflib

            from compose.color.css_names import CSS_NAMES
            near = difflib.get_close_matches(value.strip().lower(), CSS_NAMES, n=1, cutoff=0.75)
            hint = f" (did you mean '{near[0]}'?)" if near else ""
            raise ColorError(f"{where}: '{value}' is not a colour{hint}; write '#rrggbb', '#rgb', "
                             "a CSS colour name or {L = .., C = .., h = ..}")
        digits = m.group(1)
        if len(digits) == 3:
            digits = "".join(ch * 2 for ch in digits)
        return tuple(int(digits[i:i + 2], 16) / 255.0 for i in (0, 2, 4))
    if isinstance(value, Mapping):
        keys = set(value)
        if keys != {"L", "C", "h"}:
            raise ColorError(f"{where}: a colour table needs exactly the keys L, C, h "
                             f"(CIE LCh(ab)), got {sorted(keys)}")
        try:
            L, C, h = (float(value[k]) for k in ("L", "C", "h"))
        except (TypeError, ValueError):
            raise ColorError(f"{where}: L, C and h must be numbers, got {dict(value)}") from None
        if not (0 <= L <= 100) or C < 0 or not np.isfinite(h):
            raise ColorError(f"{where}: need 0 <= L <= 100 and C >= 0, got {dict(value)}")
        lch = np.array([L, C, h % 360.0])
        if not bool(lch_in_gamut(lch)):
            cmax = float(max_chroma(L, h % 360.0))
            raise ColorError(f"{where}: {{L = {L:g}, C = {C:g}, h = {h:g}}} is outside sRGB; "
                             f"the largest chroma at that L and h is {cmax:.1f}")
        rgb = np.clip(lch_to_srgb(lch), 0.0, 1.0)
        return tuple(float(v) for v in rgb)
    raise ColorError(f"{where}: {value!r} is not a colour; write '#rrggbb', '#rgb' "
                     "or {L = .., C = .., h = ..}")


def to_rgb8(rgb) -> np.ndarray:
    """Gamma-encoded sRGB floats (..., 3) -> uint8 codes, rounding; values must already be in gamut
    (within a fraction of a code), which is the only clipping done."""
    return np.clip(np.rint(np.asarray(rgb, dtype=float) * 255.0), 0, 255).astype(np.uint8)


def to_hex(rgb) -> str:
    """One gamma-encoded sRGB colour (3,) in [0, 1] -> ``'#rrggbb'``."""
    r, g, b = (int(v) for v in to_rgb8(rgb))
    return f"#{r:02x}{g:02x}{b:02x}"


def describe(rgb) -> str:
    """``'#rrggbb (L* 52.3, C* 40.1, h 120)'`` for messages and reports."""
    L, C, h = srgb_to_lch(np.asarray(rgb, dtype=float))
    return f"{to_hex(rgb)} (L* {L:.1f}, C* {C:.1f}, h {h:.0f})"
