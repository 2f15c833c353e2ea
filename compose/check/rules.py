"""The registry of hierarchy rules: rule id -> function ``(CheckContext) -> list[RuleResult]``.

Each function judges every layer (or used ramp) it applies to and returns one result per subject;
a rule that does not apply returns nothing. Order here is report order. Adding a rule is one
function plus one entry. What each rule measures, its limit and its source are in the function's
docstring (``compose check`` prints them with ``--rules``-style help via :func:`describe`).
"""
from __future__ import annotations

from collections.abc import Callable

from compose.check.classes import (
    classes_count,
    classes_separation,
    classes_separation_deutan,
    classes_separation_protan,
)
from compose.check.context import CheckContext
from compose.check.diverging_chroma import diverging_chroma_map
from compose.check.finish import roles_present
from compose.check.hierarchy import (
    ground_chroma,
    ground_lightness,
    relief_visible,
    reserved_saturation,
    theme_chroma,
    theme_chroma_min,
)
from compose.check.legibility import label_contrast, overlay_contrast, overlay_size
from compose.check.nodata_quiet import nodata_quiet
from compose.check.on_map_chroma import twin_chroma_map
from compose.check.on_map_diverging import (
    diverging_symmetry_map,
    diverging_symmetry_map_deutan,
    diverging_symmetry_map_protan,
)
from compose.check.on_map_twins import (
    twin_lightness_map,
    twin_lightness_map_deutan,
    twin_lightness_map_protan,
)
from compose.check.ramp_rules import (
    grayscale_order,
    nodata_background,
    nodata_chroma,
    nodata_separation,
    ramp_break_visible,
    ramp_diverging_symmetry,
    ramp_lightness_monotone,
    ramp_neutral_midpoint,
    ramp_step_uniformity,
    threshold_lightness,
    twin_chroma,
    twin_hue,
    twin_lightness,
)
from compose.check.relief_shift import relief_shift
from compose.check.report import RuleResult
from compose.check.text_size import label_size

__all__ = ["Rule", "RULES", "run_rules", "describe"]

Rule = Callable[[CheckContext], list[RuleResult]]

RULES: dict[str, Rule] = {
    "roles-present": roles_present,
    "ground-lightness": ground_lightness,
    "ground-chroma": ground_chroma,
    "relief-visible": relief_visible,
    "reserved-saturation": reserved_saturation,
    "theme-chroma": theme_chroma,
    "theme-chroma-min": theme_chroma_min,
    "overlay-contrast": overlay_contrast,
    "label-contrast": label_contrast,
    "label-size": label_size,
    "overlay-size": overlay_size,
    "twin-lightness": twin_lightness,
    "twin-chroma": twin_chroma,
    "twin-hue": twin_hue,
    "twin-lightness-map": twin_lightness_map,
    "twin-lightness-map-deutan": twin_lightness_map_deutan,
    "twin-lightness-map-protan": twin_lightness_map_protan,
    "twin-chroma-map": twin_chroma_map,
    "threshold-lightness": threshold_lightness,
    "nodata-chroma": nodata_chroma,
    "nodata-separation": nodata_separation,
    "nodata-background": nodata_background,
    "nodata-quiet": nodata_quiet,
    "classes-count": classes_count,
    "classes-separation": classes_separation,
    "classes-separation-deutan": classes_separation_deutan,
    "classes-separation-protan": classes_separation_protan,
    "grayscale-order": grayscale_order,
    "relief-shift": relief_shift,
    "ramp-lightness-monotone": ramp_lightness_monotone,
    "ramp-step-uniformity": ramp_step_uniformity,
    "ramp-diverging-symmetry": ramp_diverging_symmetry,
    "diverging-symmetry-map": diverging_symmetry_map,
    "diverging-symmetry-map-deutan": diverging_symmetry_map_deutan,
    "diverging-symmetry-map-protan": diverging_symmetry_map_protan,
    "diverging-chroma-map": diverging_chroma_map,
    "ramp-neutral-midpoint": ramp_neutral_midpoint,
    "ramp-break-visible": ramp_break_visible,
}


def run_rules(ctx: CheckContext, rules: dict[str, Rule] | None = None) -> list[RuleResult]:
    """Apply every rule of ``rules`` (default :data:`RULES`) in order."""
    out: list[RuleResult] = []
    for rule in (rules or RULES).values():
        out.extend(rule(ctx))
    return out


def describe() -> dict[str, str]:
    """Rule id -> the first line of its docstring."""
    return {rid: (fn.__doc__ or "").strip().splitlines()[0] for rid, fn in RULES.items()}
