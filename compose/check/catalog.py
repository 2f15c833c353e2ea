"""The catalogue of rules: one id, one meaning, one limit per measurement, for every command.

``compose check``, ``compose render`` (its report), ``compose ramp`` (the rules a ramp can be
judged by alone) and ``compose fix`` all take rule ids, comparisons, units and limits from here;
a limit is read from the style's ``[budget.*]`` key named by :attr:`RuleInfo.budget`, so the
style, not the command, decides it. ``compose check --rules`` prints this table and
``--explain RULE`` one entry.

Sources: a published source where one exists; otherwise "common practice, no source" (a rule
of thumb) or "our design target, no source".
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

__all__ = ["RuleInfo", "CATALOG", "NO_SOURCE", "OUR_TARGET", "PROOF_RULES", "limit_of",
           "rule_info"]

NO_SOURCE = "common practice, no source"
OUR_TARGET = "our design target, no source"
_BC2016 = ("Brychtova & Coltekin 2016, doi:10.1080/15230406.2016.1140074 (recommend dE00 = 10 "
           "for colours compared across a gap)")
_MACHADO = "Machado, Oliveira & Fernandes 2009, doi:10.1109/TVCG.2009.113 (severity 100 %)"


@dataclass(frozen=True, slots=True)
class RuleInfo:
    """One rule of the catalogue.

    id: the rule id in every report; what: what it measures (one line); comparison: how the
    value meets the limit (``">="``, ``"<="`` or ``"in"`` a [low, high] range); unit: of value
    and limit; budget: the ``[budget.*]`` key of its limit (``"ground.chroma[1]"``: the second
    number of ``budget.ground.chroma``), None when the limit is fixed; fixed: the limit when
    ``budget`` is None; source: where the limit comes from; severity: ``failure`` or
    ``warning`` (a warning never fails a map unless ``--strict``); measured: on what.
    """

    id: str
    what: str
    comparison: str
    unit: str
    budget: str | None
    source: str
    severity: str = "failure"
    fixed: Any = None
    measured: str = "the composite"


def _r(*args, **kw) -> RuleInfo:
    return RuleInfo(*args, **kw)


_RULES = [
    _r("roles-present", "the style has a layer judged as ground and one judged as theme, so the "
       "ground and theme rules are applied at all", ">=", "layers", None, NO_SOURCE,
       severity="warning", fixed=1, measured="the style"),
    _r("ground-lightness", "ground L* p5 and p95 inside the lightness budget: the ground stays "
       "light so the data read first", "in", "L*", "ground.lightness", NO_SOURCE,
       measured="the ground layer's own colours"),
    _r("ground-chroma", "ground C*ab p95 at most the budget: the ground stays muted", "<=", "C*ab",
       "ground.chroma[1]", NO_SOURCE, measured="the ground layer's own colours"),
    _r("relief-visible", "a relief ground shows: its L* spread p95 - p5 reaches the budget",
       ">=", "L*", "ground.relief_spread", NO_SOURCE,
       measured="the relief layer's own shading where it shows through the layers drawn over "
                "it with blend normal (hidden below 5 % of it)"),
    _r("reserved-saturation", "ground C*ab p95 + margin at most the least saturated theme's C*ab "
       "p50: saturation is kept for the data", "<=", "C*ab", "theme.margin", NO_SOURCE,
       measured="the layers' own colours"),
    _r("theme-chroma", "theme C*ab p95 at most the budget", "<=", "C*ab", "theme.chroma[1]",
       NO_SOURCE, measured="the theme's own colours"),
    _r("theme-chroma-min", "theme C*ab p50 at least the budget (only when the style states "
       "budget.theme.chroma)", ">=", "C*ab", "theme.chroma[0]", NO_SOURCE,
       measured="the theme's own colours"),
    _r("overlay-contrast", "share of a line, area or point layer's pixels whose WCAG 2 contrast "
       "against what lies beneath reaches budget.overlay.contrast (3:1)", ">=", "share",
       "overlay.share", "WCAG 2.1 SC 1.4.11 non-text contrast 3:1; the 95 % share is "
       + NO_SOURCE),
    _r("label-contrast", "share of label text pixels whose WCAG 2 contrast against the halo or "
       "what lies beneath reaches budget.overlay.label_contrast (4.5:1)", ">=", "share",
       "overlay.share", "WCAG 2.1 SC 1.4.3 contrast (minimum) 4.5:1; the 95 % share is "
       + NO_SOURCE),
    _r("label-size", "a labels layer's text size as printed at the map's dpi", ">=", "pt",
       "overlay.text_size", NO_SOURCE + " (6 pt, the usual floor for type on printed maps, is "
       "from memory)", measured="the style"),
    _r("overlay-size", "share of thin-stroke pixels that differ noticeably from what lies beneath "
       "at their size and the viewing distance (only when budget.overlay.viewing_distance > 0)",
       ">=", "share", "overlay.share",
       "Stone, Szafir & Setlur 2014 (size-dependent noticeable difference; parameters of two "
       "public implementations, not checked against the paper)"),
    _r("twin-lightness", "largest |dL*| between twin ramps at equal positions", "<=", "L*",
       "ramp.twin_lightness", OUR_TARGET + " (~1 L* is a just-noticeable lightness step)"),
    _r("twin-chroma", "largest |dC*ab| between twin ramps at equal positions", "<=", "C*ab",
       "ramp.twin_chroma", OUR_TARGET, measured="the ramps' 8-bit colours"),
    _r("twin-hue", "smallest hue difference between twins where both show a hue (C* >= 5)", ">=",
       "degrees", "ramp.twin_hue", OUR_TARGET, measured="the ramps' 8-bit colours"),
    _r("twin-lightness-map", "|dL*| between twins as drawn on the map (after every layer is "
       "blended) at equal positions, at each entry's lit end; p90 over positions", "<=", "L*",
       "ramp.map_lightness", OUR_TARGET + " (1 L* of the palette plus the 1-L* bins it is "
       "measured in)"),
    _r("twin-lightness-map-deutan", "the same in simulated deutan vision", "<=", "L*",
       "ramp.map_lightness_cvd", OUR_TARGET + "; " + _MACHADO),
    _r("twin-lightness-map-protan", "the same in simulated protan vision", "<=", "L*",
       "ramp.map_lightness_cvd", OUR_TARGET + "; " + _MACHADO),
    _r("twin-chroma-map", "|dC*ab| between twins as drawn on the map (after every layer is "
       "blended) at equal positions, at each entry's lit end; p90 over positions (normal vision: "
       "twins differ in hue by design)", "<=", "C*ab", "ramp.map_chroma",
       OUR_TARGET + " (1 C*ab of the palette plus rounding and the lit-end estimate)"),
    _r("threshold-lightness", "|dL*| across the break of a threshold ramp: lightness runs on",
       "<=", "L*", "ramp.break_lightness", OUR_TARGET, measured="the ramp's 8-bit colours"),
    _r("ramp-break-visible", "dE00 across the break of a threshold ramp: the break shows", ">=",
       "dE00", "ramp.break_difference", _BC2016, measured="the ramp's 8-bit colours"),
    _r("nodata-chroma", "C*ab of the drawn no-data colour: no-data is not data", "<=", "C*ab",
       "nodata.chroma", NO_SOURCE, measured="the drawn no-data colour"),
    _r("nodata-separation", "dE00 of the drawn no-data colour from every colour of its ramp",
       ">=", "dE00", "nodata.separation", _BC2016, measured="the drawn no-data colour"),
    _r("nodata-background", "the drawn no-data colour is the background (< 0.5 dE00) or at least "
       "budget.nodata.separation dE00 from it", ">=", "dE00", "nodata.separation", _BC2016,
       measured="the drawn no-data colour"),
    _r("nodata-quiet", "a no-data colour covering at least budget.nodata.area of the map: its L* "
       "contrast with the paper at most the data's median L* contrast with it (no-data recedes, "
       "it must not draw more attention than the data)", "<=", "L*", None,
       NO_SOURCE + " (lightness contrast with the paper draws the eye first)",
       fixed="the data's median L* contrast with the paper, measured; applies from "
       "budget.nodata.area of the map (default 0.1)",
       measured="the composite (as drawn, where no later layer covers it)"),
    _r("classes-count", "number of classes inside budget.classes.count", "in", "classes",
       "classes.count", NO_SOURCE + " (seven plus or minus two)", severity="warning",
       measured="the ramp"),
    _r("classes-separation", "smallest dE00 between two classes (pairs of one family: half), in "
       "normal vision", ">=", "dE00", "classes.separation", _BC2016),
    _r("classes-separation-deutan", "the same in simulated deutan vision", ">=", "dE00",
       "classes.separation", _BC2016 + "; " + _MACHADO),
    _r("classes-separation-protan", "the same in simulated protan vision", ">=", "dE00",
       "classes.separation", _BC2016 + "; " + _MACHADO),
    _r("grayscale-order", "Spearman rho of data value and L*, in the ramp's direction: the map "
       "still orders its values printed in gray", ">=", "rho", "theme.gray_order", OUR_TARGET),
    _r("relief-shift", "largest share of a theme class's pixels the relief shades to or below "
       "the unshaded (lit-end, L* p90) lightness of the next darker class: a shaded light class "
       "must not read as an unshaded darker one", "<=", "share", "theme.relief_overlap",
       NO_SOURCE + " (a tenth of a class on steep shaded slopes)"),
    _r("ramp-lightness-monotone", "largest L* reversal along a sequential ramp (each arm of a "
       "diverging one)", "<=", "L*", None, "common practice, no source (lightness orders values)",
       fixed=0.0, measured="the ramp's displayable colours"),
    _r("ramp-step-uniformity", "coefficient of variation of the CAM02-UCS differences between "
       "the drawn colours at equal data steps (what legend and map show)", "<=", "%",
       "ramp.evenness", OUR_TARGET, measured="the ramp's 8-bit colours at equal data steps"),
    _r("ramp-diverging-symmetry", "largest |dL*| at equal distance either side of a diverging "
       "ramp's centre", "<=", "L*", "ramp.symmetry", OUR_TARGET + " (~1 L* is just noticeable)"),
    _r("diverging-symmetry-map", "|dL*| between the arms of a diverging theme as drawn on the "
       "map at equal distance from the centre, at each entry's lit end; p90 over distances",
       "<=", "L*", "ramp.map_lightness", OUR_TARGET + " (1 L* of the palette plus the 1-L* bins "
       "it is measured in)"),
    _r("diverging-symmetry-map-deutan", "the same in simulated deutan vision", "<=", "L*",
       "ramp.map_lightness_cvd", OUR_TARGET + "; " + _MACHADO),
    _r("diverging-symmetry-map-protan", "the same in simulated protan vision", "<=", "L*",
       "ramp.map_lightness_cvd", OUR_TARGET + "; " + _MACHADO),
    _r("diverging-chroma-map", "|dC*ab| between the arms of a diverging theme as drawn on the "
       "map (after every layer is blended) at equal distance from the centre, at each distance's "
       "lit end; p90 over distances (normal vision: the arms differ in hue by design)", "<=",
       "C*ab", "ramp.map_arm_chroma",
       OUR_TARGET + " (1 C*ab of the palette plus rounding and the lit-end estimate, as "
       "twin-chroma-map)"),
    _r("ramp-neutral-midpoint", "C*ab of a diverging ramp's midpoint (a warning: a coloured "
       "midpoint may be meant)", "<=", "C*ab", "ramp.midpoint_chroma", NO_SOURCE,
       severity="warning", measured="the ramp's 8-bit colours"),
]

#: Rule id -> :class:`RuleInfo`, in report order.
CATALOG: dict[str, RuleInfo] = {r.id: r for r in _RULES}


#: Rules whose numbers are the proofs' metrics (grey order of themes, classes under CVD).
PROOF_RULES = ("grayscale-order", "classes-separation-deutan", "classes-separation-protan")


def rule_info(rule: str) -> RuleInfo:
    """The catalogue entry of ``rule`` (KeyError for an unknown id)."""
    return CATALOG[rule]


def _budget_value(budgets, key: str) -> Any:
    table, _, rest = key.partition(".")
    name, _, index = rest.partition("[")
    value = getattr(getattr(budgets, table), name)
    if index:
        value = value[int(index.rstrip("]"))]
    if isinstance(value, tuple):
        value = list(value)
    return value


def limit_of(rule: str, budgets) -> tuple[Any, str, str | None]:
    """(limit, origin, budget key) of ``rule`` under ``budgets``: origin ``"style"`` when the
    style stated the key, ``"default"`` otherwise, ``"fixed"`` for rules without a budget key."""
    info = CATALOG[rule]
    if info.budget is None:
        return info.fixed, "fixed", None
    key = f"budget.{info.budget}"
    stated = getattr(budgets, "origin", None)
    origin = stated(info.budget.split("[")[0]) if stated is not None else "default"
    return _budget_value(budgets, info.budget), origin, key
