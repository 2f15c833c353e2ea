"""Colour ramps designed in a perceptual colour space: model, builders, lookup tables, metrics.

Build the ramps of a style with :func:`build_ramps`, draw one through its :class:`Lut`
(``ramp.lut().index(values)`` -> uint16 indices), measure it with :func:`ramp_metrics` and
judge it with :func:`rule_checks`.
"""
from compose.ramps.build import build_ramp, build_ramps, choose_nodata
from compose.ramps.lut import Lut, drawn_samples, quantile_breaks
from compose.ramps.metrics import RampLimits, RampMetrics, RuleCheck, ramp_metrics, rule_checks
from compose.ramps.model import STEPPED_COLOR_RULE, Piece, Ramp
from compose.ramps.spec import RampClass, RampSpec, parse_ramp

__all__ = [
    "build_ramp", "build_ramps", "choose_nodata", "Lut", "drawn_samples", "quantile_breaks",
    "RampLimits", "RampMetrics", "RuleCheck", "ramp_metrics", "rule_checks",
    "STEPPED_COLOR_RULE", "Piece", "Ramp", "RampClass", "RampSpec", "parse_ramp",
]
