"""Layer kinds. Each kind is a class in its own module; :data:`LAYER_KINDS` maps a style's
``kind`` to it. Adding a kind: one module plus one entry here (and its options in compose.style)."""
from __future__ import annotations

import importlib

__all__ = ["LAYER_KINDS", "layer_class"]

# kind -> (module, class); imported lazily so `compose --help` stays fast
LAYER_KINDS: dict[str, tuple[str, str]] = {
    "relief": ("compose.layers.relief", "ReliefLayer"),
    "field": ("compose.layers.raster", "FieldLayer"),
    "classes": ("compose.layers.raster", "ClassesLayer"),
    "lines": ("compose.layers.vector", "LinesLayer"),
    "areas": ("compose.layers.vector", "AreasLayer"),
    "points": ("compose.layers.vector", "PointsLayer"),
    "labels": ("compose.layers.label", "LabelsLayer"),
}


def layer_class(kind: str):
    """The class implementing layer ``kind``."""
    module, name = LAYER_KINDS[kind]
    return getattr(importlib.import_module(module), name)
