"""compose.style: a TOML style file -> typed, frozen, validated dataclasses (docs/style.md)."""
from compose.style.kinds import (
                                 LAYER_KINDS,
                                 NODATA_TRANSPARENT,
                                 RESAMPLING,
                                 AreaOptions,
                                 ClassesOptions,
                                 FieldOptions,
                                 Halo,
                                 KindSchema,
                                 LabelOptions,
                                 LayerOptions,
                                 LineOptions,
                                 PointOptions,
                                 ReliefOptions,
                                 default_shadow,
)
from compose.style.load import load_style
from compose.style.model import (
                                 BLEND_MODES,
                                 ROLES,
                                 Budgets,
                                 ClassesBudget,
                                 GroundBudget,
                                 LayerSpec,
                                 MapSpec,
                                 NodataBudget,
                                 OverlayBudget,
                                 RampTable,
                                 Style,
                                 ThemeBudget,
)

__all__ = [
    "load_style",
    "Style", "MapSpec", "Budgets", "GroundBudget", "ThemeBudget", "OverlayBudget",
    "ClassesBudget", "NodataBudget", "RampTable", "LayerSpec", "ROLES", "BLEND_MODES",
    "LAYER_KINDS", "KindSchema", "LayerOptions", "ReliefOptions", "FieldOptions",
    "ClassesOptions", "LineOptions", "AreaOptions", "PointOptions", "LabelOptions", "Halo",
    "RESAMPLING", "NODATA_TRANSPARENT", "default_shadow",
]
