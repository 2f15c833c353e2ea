"""Measure a built ramp and judge it against the rules of its kind.

Everything is measured on the colours as drawn: 8-bit sRGB codes, converted to CIELAB (D65),
except the two properties of the design that 8-bit rounding would hide at lookup-table density --
lightness monotonicity and step uniformity at ``samples`` entries -- which use the unrounded
(displayable) colours. CVD proofs: Machado, Oliveira & Fernandes (2009) at severity 100.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import NamedTuple

import numpy as np

from compose.color.cam import srgb_to_cam02ucs
from compose.color.cvd import simulate_cvd
from compose.color.difference import delta_e_2000
from compose.color.lab import lab_to_lch, lab_to_srgb, srgb_to_lab
from compose.color.parse import to_rgb8
from compose.ramps.lut import lut_for
from compose.ramps.model import Ramp

__all__ = ["VISIONS", "COARSE_SAMPLES", "EVEN_STEPS", "evenness", "evenness_profile", "ORDER_SAMPLES",
           "RULE_LEVELS", "RampMetrics", "RampLimits", "RuleCheck", "ramp_metrics", "rule_checks",
           "spearman", "vision_lab"]

VISIONS = ("normal", "deutan", "protan", "tritan")
COARSE_SAMPLES = 32   # step uniformity of the 8-bit colours (finer steps drown in rounding)
#: Equal data steps at which evenness is measured: about a legend's resolution (finer steps of
#: 8-bit colours drown in rounding; our choice, no source).
EVEN_STEPS = 16
ORDER_SAMPLES = 16    # adjacent-step dE00 of a continuous ramp, per vision


@dataclass(frozen=True, slots=True)
class RampMetrics:
    """Measurements of one ramp; None where a measure does not apply to the kind.

    Units: L*, C*ab, hue degrees, CIEDE2000 (dE00), coefficient of variation in percent.
    ``lightness_reversal``: the largest L* drop against the ramp's direction (per arm, away from
    the centre, for diverging ramps). ``step_cv``: :func:`evenness` -- CV (%) of CAM02-UCS
    differences of the drawn 8-bit colours at ``EVEN_STEPS`` equal data steps, the worst over
    every step size; ``step_cv_8bit`` the CV of consecutive differences of ``COARSE_SAMPLES``
    8-bit colours. ``*_de00`` dicts map a vision (normal, deutan, protan,
    tritan) to the smallest difference. ``grayscale_rho``: Spearman rank correlation of value vs
    L* over the samples (diverging: of the distance from the centre vs L*).
    """

    name: str
    kind: str
    samples: int
    lightness_monotone: bool | None
    lightness_reversal: float | None
    step_cv: float | None
    step_cv_8bit: float | None
    lightness_range: tuple[float, float]
    chroma_range: tuple[float, float]
    gamut_removed_max: float
    gamut_removed_mean: float
    matched_removed_max: float
    matched_removed_mean: float
    symmetry_dl_max: float | None
    midpoint_chroma: float | None
    break_dl: float | None
    break_dh: float | None
    break_de00: float | None
    twin_dl_max: float | None
    twin_dc_max: float | None
    min_step_de00: dict | None
    min_pair_de00: dict | None
    family_min_pair_de00: dict | None
    grayscale_rho: float | None
    class_count: int | None
    nodata_min_de00: float
    nodata_chroma: float
    warnings: tuple[str, ...] = ()


@dataclass(frozen=True, slots=True)
class RampLimits:
    """Limits of the ramp rules (defaults; a style's budgets may replace some)."""

    step_cv: float = 10.0           # % (our design target, no source)
    symmetry_dl: float = 1.0        # L*; ~1 is a just-noticeable lightness difference
    midpoint_chroma: float = 5.0    # C*ab of a "neutral" midpoint (common practice, no source)
    break_dl: float = 1.0           # L* across a threshold break
    break_de00: float = 10.0        # the break must show (Brychtova & Coltekin 2016: dE00 10)
    twin_dl: float = 1.0            # L* between twins at the same position
    twin_dc: float = 1.0            # C*ab between twins at the same position
    class_separation: float = 10.0  # dE00 between classes (Brychtova & Coltekin 2016)
    class_count: tuple[int, int] = (5, 9)  # common practice: seven plus or minus two
    nodata_separation: float = 10.0  # dE00 from every ramp colour (Brychtova & Coltekin 2016)
    nodata_chroma: float = 3.0      # C*ab
    grayscale_rho: float = 0.95     # |Spearman rho| of value vs L* (our design target, no source)

    @classmethod
    def from_budgets(cls, budgets) -> RampLimits:
        """The limits a style's budgets set (``[budget.ramp]``, ``[budget.classes]``,
        ``[budget.nodata]``, ``budget.theme.gray_order``): one limit per rule for every command."""
        if budgets is None:
            return cls()
        r, c, n, t = budgets.ramp, budgets.classes, budgets.nodata, budgets.theme
        return cls(step_cv=float(r.evenness), symmetry_dl=float(r.symmetry),
                   midpoint_chroma=float(r.midpoint_chroma), break_dl=float(r.break_lightness),
                   break_de00=float(r.break_difference), twin_dl=float(r.twin_lightness),
                   twin_dc=float(r.twin_chroma), class_separation=float(c.separation),
                   class_count=tuple(int(v) for v in c.count),
                   nodata_separation=float(n.separation), nodata_chroma=float(n.chroma),
                   grayscale_rho=float(t.gray_order))


#: Rules whose failure is a warning (ids and severities as in compose.check.catalog).
RULE_LEVELS = {"classes-count": "warning", "ramp-neutral-midpoint": "warning"}


class RuleCheck(NamedTuple):
    """One verdict: (rule id, passed, measured value, limit, one-line message)."""

    rule: str
    passed: bool
    value: float
    limit: float
    message: str

    @property
    def level(self) -> str:
        """'error' or 'warning' (a failed warning does not fail a check)."""
        return RULE_LEVELS.get(self.rule, "error")


def spearman(x: np.ndarray, y: np.ndarray) -> float:
    """Spearman rank correlation of x and y (n,), ties given their average rank."""
    def rank(a):
        a = np.asarray(a, dtype=float)
        _, inv, counts = np.unique(a, return_inverse=True, return_counts=True)
        ends = np.cumsum(counts)
        return ((ends - counts + 1 + ends) / 2.0)[inv]
    rx, ry = rank(x), rank(y)
    rx, ry = rx - rx.mean(), ry - ry.mean()
    den = np.sqrt(np.sum(rx * rx) * np.sum(ry * ry))
    return float(np.sum(rx * ry) / den) if den > 0 else 0.0


def vision_lab(rgb8: np.ndarray) -> dict[str, np.ndarray]:
    """CIELAB (n, 3) of 8-bit colours (n, 3) in normal vision and under each CVD simulation."""
    rgb = np.asarray(rgb8, dtype=float) / 255.0
    out = {"normal": srgb_to_lab(rgb)}
    for kind in VISIONS[1:]:
        out[kind] = srgb_to_lab(simulate_cvd(rgb, kind, 100.0))
    return out


def _min_pairs(lab: np.ndarray) -> float:
    if len(lab) < 2:
        return float("nan")
    d = delta_e_2000(lab[:, None, :], lab[None, :, :])
    return float(np.min(d[np.triu_indices(len(lab), 1)]))


def _min_adjacent(lab: np.ndarray) -> float:
    return float(np.min(delta_e_2000(lab[:-1], lab[1:]))) if len(lab) > 1 else float("nan")


def _reversal(L: np.ndarray) -> tuple[bool, float]:
    """(strictly monotone?, largest drop against the direction of L[-1] - L[0])."""
    direction = 1.0 if L[-1] >= L[0] else -1.0
    d = L * direction
    monotone = bool(np.all(np.diff(d) > 0))
    return monotone, float(np.max(np.maximum.accumulate(d) - d))


def _cv(lab: np.ndarray, skip: np.ndarray | None = None) -> float:
    ucs = srgb_to_cam02ucs(np.clip(lab_to_srgb(lab), 0.0, 1.0))
    step = np.sqrt(np.sum(np.diff(ucs, axis=0) ** 2, axis=-1))
    if skip is not None:
        step = step[~skip]
    return float(100.0 * np.std(step) / np.mean(step)) if np.mean(step) > 0 else float("inf")


def evenness(ramp: Ramp, steps: int = EVEN_STEPS) -> float:
    """How evenly equal data steps read: CV (%) of the CAM02-UCS differences between the drawn
    8-bit colours at ``steps`` equal steps of the domain (what the legend and the map show), for
    every step size g = 1 .. steps/2 (pairs g steps apart), the worst g.

    Measured at equal *data* steps, not along the curve, so a ramp whose colours crowd at one end
    of the domain fails; pairs g apart catch a ramp whose lightness turns back (far values that
    look alike), which consecutive steps alone miss. The arms of a diverging ramp and the sides
    of a threshold's break are judged each on its own (across them the jump is the design).
    """
    return evenness_profile(ramp, steps)[2]


def evenness_profile(ramp: Ramp, steps: int = EVEN_STEPS) -> tuple[np.ndarray, np.ndarray, float]:
    """(mid values, differences in % of their run's mean, CV %) at the worst step size of
    :func:`evenness` (NaN where a pair spans a centre or a break)."""
    lo, hi = ramp.domain
    v = np.linspace(lo, hi, steps + 1)
    ucs = srgb_to_cam02ucs(to_rgb8(ramp.colors_at(v)) / 255.0)
    if ramp.kind == "threshold":      # each side on its own: the two may run at their own pace
        side = (v >= ramp.at).astype(int)
    elif ramp.kind == "diverging":    # each arm on its own, away from the centre
        side = np.where(v < ramp.center, 0, np.where(v > ramp.center, 1, 2))
    else:
        side = np.zeros(v.size, dtype=int)
    best = (np.zeros(0), np.zeros(0), 0.0)
    for g in range(1, steps // 2 + 1):
        d = np.sqrt(np.sum((ucs[g:] - ucs[:-g]) ** 2, axis=-1))
        a, b = side[:-g], side[g:]
        pct = np.full(d.shape, np.nan)
        worst = 0.0
        for k in (0, 1):
            if ramp.kind == "diverging":          # the centre belongs to both arms
                keep = ((a == k) | (a == 2)) & ((b == k) | (b == 2))
            else:
                keep = (a == k) & (b == k)
            dk = d[keep]
            if dk.size > 1 and dk.mean() > 0:
                pct[keep] = 100.0 * dk / dk.mean()
                worst = max(worst, float(100.0 * dk.std() / dk.mean()))
        if worst > best[2] or best[0].size == 0:
            best = ((v[:-g] + v[g:]) / 2, pct, worst)
    return best


def _lab8(rgb: np.ndarray) -> np.ndarray:
    return srgb_to_lab(to_rgb8(rgb) / 255.0)


def _hue_gap(h1: float, h2: float) -> float:
    return float(abs((h2 - h1 + 180.0) % 360.0 - 180.0))


def ramp_metrics(ramp: Ramp) -> RampMetrics:
    """Measure ``ramp`` (see :class:`RampMetrics`)."""
    m: dict = dict.fromkeys(RampMetrics.__slots__)
    m.update(name=ramp.name, kind=ramp.kind, samples=ramp.samples, warnings=())
    pieces = ramp.pieces
    removed = np.concatenate([p.removed for p in pieces]) if pieces else np.zeros(1)
    matched = np.concatenate([p.matched for p in pieces]) if pieces else np.zeros(1)
    m.update(gamut_removed_max=float(removed.max()), gamut_removed_mean=float(removed.mean()),
             matched_removed_max=float(matched.max()), matched_removed_mean=float(matched.mean()))
    warnings = []
    if ramp.kind == "qualitative":
        rgb8 = to_rgb8(np.array([c.rgb for c in ramp.classes]))
        drawn = rgb8
        m.update(_class_metrics(rgb8))
        fams: dict = {}
        for c, code in zip(ramp.classes, rgb8):
            if c.family:
                fams.setdefault(c.family, []).append(code)
        m["family_min_pair_de00"] = {f: {v: _min_pairs(lab) for v, lab in vision_lab(np.array(codes)).items()}
                                     for f, codes in fams.items() if len(codes) > 1}
        m["class_count"] = len(ramp.classes)
    else:
        drawn = _continuous(ramp, m)
        if ramp.stepped:
            lut = lut_for(ramp)
            classes = lut.rgb8[:lut.n]
            m.update(_class_metrics(classes))
            m["class_count"] = lut.n
            m["grayscale_rho"] = spearman(np.arange(lut.n), lut.lab[:lut.n, 0])
            drawn = np.concatenate([drawn, classes])
            if lut.quantile_pending:
                warnings.append("quantile steps are measured as equal steps (no data given)")
    if m["class_count"] is not None:
        lo, hi = (5, 9)
        if not lo <= m["class_count"] <= hi:
            warnings.append(f"{m['class_count']} classes; common practice is 5 to 9")
    lch = lab_to_lch(srgb_to_lab(drawn / 255.0))
    m["lightness_range"] = (float(lch[:, 0].min()), float(lch[:, 0].max()))
    m["chroma_range"] = (float(lch[:, 1].min()), float(lch[:, 1].max()))
    nd = _lab8(np.array(ramp.nodata))
    m["nodata_min_de00"] = float(np.min(delta_e_2000(nd, srgb_to_lab(drawn / 255.0))))
    m["nodata_chroma"] = float(np.hypot(nd[1], nd[2]))
    m["warnings"] = tuple(warnings)
    return RampMetrics(**m)


def _class_metrics(rgb8: np.ndarray) -> dict:
    labs = vision_lab(rgb8)
    return {"min_step_de00": {v: _min_adjacent(lab) for v, lab in labs.items()},
            "min_pair_de00": {v: _min_pairs(lab) for v, lab in labs.items()}}


def _continuous(ramp: Ramp, m: dict) -> np.ndarray:
    """Fill the measures of a continuous ramp into ``m``; return the drawn 8-bit colours."""
    lo, hi = ramp.domain
    n = ramp.samples
    values = np.linspace(lo, hi, n)
    lab_f = ramp.lab_at(values)
    if ramp.kind == "diverging":
        c = ramp.center
        arms = [lab_f[values <= c, 0][::-1], lab_f[values >= c, 0]]
        arms = [np.concatenate([[ramp.lab_at(c)[0]], a]) for a in arms]
        res = [_reversal(a) for a in arms if len(a) > 1]
        m["lightness_monotone"] = all(r[0] for r in res)
        m["lightness_reversal"] = max(r[1] for r in res)
    else:
        m["lightness_monotone"], m["lightness_reversal"] = _reversal(lab_f[:, 0])
    coarse_v = np.linspace(lo, hi, COARSE_SAMPLES)
    coarse = _lab8(ramp.colors_at(coarse_v))
    m["step_cv"] = evenness(ramp)
    if ramp.kind == "threshold":   # each side on its own: the break is a designed jump
        sides = [coarse_v < ramp.at, coarse_v >= ramp.at]
        m["step_cv_8bit"] = max(_cv(coarse[b]) for b in sides if b.sum() > 2)
    else:
        m["step_cv_8bit"] = _cv(coarse)
    drawn = to_rgb8(ramp.colors_at(values))
    L8 = srgb_to_lab(drawn / 255.0)[:, 0]
    if ramp.kind == "diverging":
        m["grayscale_rho"] = spearman(np.abs(values - ramp.center), L8)
        reach = min(ramp.center - lo, hi - ramp.center)
        d = np.linspace(0.0, reach, 257)
        dl = _lab8(ramp.colors_at(ramp.center - d))[:, 0] - _lab8(ramp.colors_at(ramp.center + d))[:, 0]
        m["symmetry_dl_max"] = float(np.max(np.abs(dl)))
        mid = _lab8(ramp.colors_at(np.array(ramp.center)))
        m["midpoint_chroma"] = float(np.hypot(mid[1], mid[2]))
    else:
        m["grayscale_rho"] = spearman(values, L8)
    if ramp.kind == "threshold":
        lut = lut_for(replace(ramp, steps=None, breaks=None), n)
        first = lut.split[1]
        below, above = lut.lab[first - 1], lut.lab[first]
        lb, la = lab_to_lch(below), lab_to_lch(above)
        m["break_dl"] = float(abs(la[0] - lb[0]))
        m["break_dh"] = _hue_gap(lb[2], la[2])
        m["break_de00"] = float(delta_e_2000(below, above))
    if ramp.twin_of is not None and ramp.base is not None:   # twins of any base kind
        t = np.linspace(0.0, 1.0, n)
        mine = lab_to_lch(_lab8(ramp.colors_at(t, fraction=True)))
        theirs = lab_to_lch(_lab8(ramp.base.colors_at(t, fraction=True)))
        m["twin_dl_max"] = float(np.max(np.abs(mine[:, 0] - theirs[:, 0])))
        m["twin_dc_max"] = float(np.max(np.abs(mine[:, 1] - theirs[:, 1])))
    if not ramp.stepped:
        order = vision_lab(to_rgb8(ramp.colors_at(np.linspace(lo, hi, ORDER_SAMPLES))))
        m["min_step_de00"] = {v: _min_adjacent(lab) for v, lab in order.items()}
    return np.concatenate([drawn, to_rgb8(np.array([ramp.outside_low, ramp.outside_high]))])


def rule_checks(metrics: RampMetrics, limits: RampLimits = RampLimits()) -> list[RuleCheck]:
    """The verdicts of the rules for ``metrics.kind`` (the rule ids of the
    checker's catalogue, :mod:`compose.check.catalog`; see :data:`RULE_LEVELS`)."""
    m, lim, out = metrics, limits, []
    name = f'ramp "{m.name}"'

    def rule(rid: str, passed: bool, value: float, limit: float, text: str) -> None:
        verdict = "ok" if passed else ("warning" if RULE_LEVELS.get(rid) == "warning" else "fails")
        out.append(RuleCheck(rid, bool(passed), float(value), float(limit), f"{name}: {text} ({verdict})"))

    if m.lightness_monotone is not None:
        where = "each arm, away from the midpoint" if m.kind == "diverging" else "end to end"
        rule("ramp-lightness-monotone", m.lightness_monotone, m.lightness_reversal, 0.0,
             f"L* monotone {where}: largest reversal {m.lightness_reversal:.2f}")
    if m.kind in ("sequential", "twin", "diverging", "threshold") and m.step_cv is not None:
        rule("ramp-step-uniformity", m.step_cv <= lim.step_cv, m.step_cv, lim.step_cv,
             f"CV of CAM02-UCS differences at {EVEN_STEPS} equal data steps (8-bit colours, "
             f"worst step size) {m.step_cv:.1f} % (limit {lim.step_cv:g} %)")
    if m.grayscale_rho is not None and m.kind != "qualitative":
        rho = abs(m.grayscale_rho)
        rule("grayscale-order", rho >= lim.grayscale_rho, rho, lim.grayscale_rho,
             f"L* orders the values: |Spearman rho| {rho:.3f} (limit {lim.grayscale_rho:g})")
    if m.symmetry_dl_max is not None:
        rule("ramp-diverging-symmetry", m.symmetry_dl_max <= lim.symmetry_dl, m.symmetry_dl_max,
             lim.symmetry_dl, f"|dL*| at equal distance from the centre {m.symmetry_dl_max:.2f} "
             f"(limit {lim.symmetry_dl:g})")
        rule("ramp-neutral-midpoint", m.midpoint_chroma <= lim.midpoint_chroma, m.midpoint_chroma,
             lim.midpoint_chroma, f"midpoint C* {m.midpoint_chroma:.1f} (limit {lim.midpoint_chroma:g})")
    if m.break_dl is not None:
        rule("threshold-lightness", m.break_dl <= lim.break_dl, m.break_dl, lim.break_dl,
             f"|dL*| across the break {m.break_dl:.2f} (limit {lim.break_dl:g})")
        rule("ramp-break-visible", m.break_de00 >= lim.break_de00, m.break_de00, lim.break_de00,
             f"dE00 across the break {m.break_de00:.1f}, hue change {m.break_dh:.0f} deg "
             f"(at least {lim.break_de00:g})")
    if m.twin_dl_max is not None:
        rule("twin-lightness", m.twin_dl_max <= lim.twin_dl, m.twin_dl_max, lim.twin_dl,
             f"|dL*| against its base {m.twin_dl_max:.2f} (limit {lim.twin_dl:g})")
        rule("twin-chroma", m.twin_dc_max <= lim.twin_dc, m.twin_dc_max, lim.twin_dc,
             f"|dC*| against its base {m.twin_dc_max:.2f} (limit {lim.twin_dc:g})")
    if m.min_pair_de00 is not None:
        qual = m.kind == "qualitative"
        source = m.min_pair_de00 if qual else m.min_step_de00
        what = "pairwise" if qual else "adjacent-class"
        prefix = "classes-separation"
        for vision in ("normal", "deutan", "protan"):
            rid = prefix if vision == "normal" else f"{prefix}-{vision}"
            v = source[vision]
            rule(rid, v >= lim.class_separation, v, lim.class_separation,
                 f"smallest {what} dE00 {v:.1f} in {vision} vision (at least {lim.class_separation:g})")
    if m.class_count is not None:
        lo, hi = lim.class_count
        rule("classes-count", lo <= m.class_count <= hi, m.class_count, hi,
             f"{m.class_count} classes (common practice: {lo} to {hi})")
    rule("nodata-separation", m.nodata_min_de00 >= lim.nodata_separation, m.nodata_min_de00,
         lim.nodata_separation, f"nodata {m.nodata_min_de00:.1f} dE00 from the nearest ramp colour "
         f"(at least {lim.nodata_separation:g})")
    rule("nodata-chroma", m.nodata_chroma <= lim.nodata_chroma, m.nodata_chroma, lim.nodata_chroma,
         f"nodata C* {m.nodata_chroma:.1f} (limit {lim.nodata_chroma:g})")
    return out
