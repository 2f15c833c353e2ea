"""Results of the hierarchy check: one :class:`RuleResult` per rule and subject, a per-layer
:class:`LayerSummary`, the :class:`Report` that holds them, its JSON form and its terminal table.

Computation lives in :mod:`compose.check.rules`; this module only holds and formats numbers.
"""
from __future__ import annotations

import math
import shutil
import textwrap
from dataclasses import dataclass, field
from typing import Any

from compose.caution import CAUTION

__all__ = ["FAILURE", "WARNING", "SEVERITIES", "Change", "RuleResult", "LayerSummary", "Report",
           "format_report", "CAUTION"]

FAILURE = "failure"
WARNING = "warning"
SEVERITIES = (FAILURE, WARNING)



def _clean(value: Any) -> Any:
    """JSON-safe copy: NaN/inf -> None, tuples -> lists, numpy scalars -> Python numbers."""
    if isinstance(value, dict):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


@dataclass(frozen=True, slots=True)
class Change:
    """A concrete edit of the style that the fix proposes, machine-readable.

    table: the style table to edit, e.g. ``layer "relief"``, ``ramp "land"`` or an element of a
    ramp's list, ``ramp "cover".classes[2]``; values: key -> new value as written in TOML (a
    ``"#rrggbb"`` string, a number, an ``{L, C, h}`` or halo table, a list).
    """

    table: str
    values: dict

    def to_json(self) -> dict:
        return {"table": self.table, "values": _clean(self.values)}


@dataclass(frozen=True, slots=True)
class RuleResult:
    """One rule applied to one subject (a layer, or a ramp and the layers using it).

    value / limit: the measured number and the bound it is compared with (units in ``message``);
    passed: False only when a *failure*-severity rule is not met (a warning always passes);
    fix: what to change, in numbers ('' when passed); change: the same as an edit, when one
    key can be named; ramp: the ramp judged, for ramp rules.
    """

    rule: str
    layer: str | None
    value: float | list | None
    limit: float | list | None
    passed: bool
    message: str
    fix: str = ""
    severity: str = FAILURE
    ramp: str | None = None
    change: Change | None = None
    met: bool = field(default=True)   # whether the condition held (for warnings: False = warned)

    def __post_init__(self) -> None:
        if self.severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {SEVERITIES}, got {self.severity!r}")

    @property
    def verdict(self) -> str:
        if self.severity == WARNING:
            return "ok" if self.met else "warn"
        return "pass" if self.passed else "FAIL"

    def to_json(self) -> dict:
        return _clean({"rule": self.rule, "layer": self.layer, "passed": self.passed,
                       "value": self.value, "limit": self.limit, "message": self.message,
                       "fix": self.fix, "severity": self.severity, "ramp": self.ramp,
                       "change": None if self.change is None else self.change.to_json()})


@dataclass(frozen=True, slots=True)
class LayerSummary:
    """Per-layer numbers: coverage (0-1 of the canvas), L* and C*ab p5/p50/p95 of the layer's own
    colours (coverage-weighted; a theme's no-data colour left out); for overlays the L* p5/p50/p95
    of what lay beneath the judged part and the share of its pixels reaching the contrast limit."""

    name: str
    role: str
    kind: str
    coverage: float
    lightness: tuple[float, float, float]
    chroma: tuple[float, float, float]
    beneath: tuple[float, float, float] | None = None
    contrast_share: float | None = None

    def to_json(self) -> dict:
        def pct(v):
            return {"p5": v[0], "p50": v[1], "p95": v[2]}
        out = {"name": self.name, "role": self.role, "kind": self.kind, "coverage": self.coverage,
               "lightness": pct(self.lightness), "chroma": pct(self.chroma)}
        if self.role == "overlay":
            out["beneath"] = {"lightness": pct(self.beneath) if self.beneath else None}
            out["contrast_share"] = self.contrast_share
        return _clean(out)


@dataclass(frozen=True, slots=True)
class Report:
    """The check of one style: rule results in rule order, layer summaries in drawing order."""

    style: str
    rules: tuple[RuleResult, ...]
    layers: tuple[LayerSummary, ...]
    caution: str = CAUTION

    @property
    def passed(self) -> bool:
        """True when every failure-severity rule passed (warnings never fail a map)."""
        return all(r.passed for r in self.rules)

    @property
    def failures(self) -> tuple[RuleResult, ...]:
        return tuple(r for r in self.rules if not r.passed)

    @property
    def warnings(self) -> tuple[RuleResult, ...]:
        return tuple(r for r in self.rules if r.severity == WARNING and not r.met)

    def rule(self, rule: str, layer: str | None = None) -> list[RuleResult]:
        """The results of rule id ``rule`` (optionally of one layer)."""
        return [r for r in self.rules if r.rule == rule and (layer is None or r.layer == layer)]

    def to_json(self) -> dict:
        """The object written as NAME.check.json and printed by ``compose check --json``."""
        return {"passed": self.passed, "style": self.style,
                "rules": [r.to_json() for r in self.rules],
                "layers": [s.to_json() for s in self.layers], "caution": self.caution}


# --- terminal table ------------------------------------------------------------------------

def _num(v) -> str:
    if v is None:
        return "-"
    if isinstance(v, (list, tuple)):
        return "..".join(_num(x) for x in v)
    if isinstance(v, str):
        return v
    if isinstance(v, float) and not math.isfinite(v):
        return "n/a"
    if isinstance(v, float):
        return f"{v:.3g}" if abs(v) < 10 else f"{v:.1f}"
    if hasattr(v, "item"):
        return _num(v.item())
    return str(v)


def _order(r: RuleResult) -> int:
    if not r.passed:
        return 0
    if r.severity == WARNING and not r.met:
        return 1
    return 2


def _table(rows: list[list[str]], widths: list[int]) -> list[str]:
    lines = []
    for row in rows:
        cells = [textwrap.wrap(c, w) or [""] for c, w in zip(row, widths)]
        for i in range(max(len(c) for c in cells)):
            lines.append("  ".join((c[i] if i < len(c) else "").ljust(w)
                                   for c, w in zip(cells, widths)).rstrip())
    return lines


def format_report(report: Report, width: int | None = None) -> str:
    """Readable text: rules (failures, then warnings, then passes), per-layer L*/C*, caution."""
    width = width or max(100, min(160, shutil.get_terminal_size((120, 24)).columns))
    rules = sorted(report.rules, key=_order)
    fixed = [26, 16, 11, 11, 5]
    last = max(30, width - sum(fixed) - 2 * len(fixed))
    head = ["rule", "layer", "measured", "limit", "", "message / fix"]
    rows = [head, ["-" * w for w in fixed + [last]]]
    for r in rules:
        text = r.message + (f"  FIX: {r.fix}" if r.fix else "")
        subject = r.layer or (f"ramp {r.ramp}" if r.ramp else "-")
        rows.append([r.rule, subject, _num(r.value), _num(r.limit), r.verdict, text])
    lines = _table(rows, fixed + [last])
    n_fail, n_warn = len(report.failures), len(report.warnings)
    verdict = "PASSED" if report.passed else "FAILED"
    lines.append("")
    lines.append(f"{report.style}: {verdict} -- {len(report.rules)} results, {n_fail} failed, "
                 f"{n_warn} warning(s)")
    lines.append("")
    lrows = [["layer", "role", "coverage", "L* p5/p50/p95", "C* p5/p50/p95", "beneath L*", "share"]]
    for s in report.layers:
        trip = lambda t: "/".join(f"{v:.1f}" if v == v else "n/a" for v in t)  # noqa: E731
        lrows.append([s.name, s.role, f"{s.coverage:.1%}", trip(s.lightness), trip(s.chroma),
                      trip(s.beneath) if s.beneath else "-",
                      "-" if s.contrast_share is None else f"{s.contrast_share:.1%}"])
    lines += _table(lrows, [16, 8, 9, 17, 17, 17, 7])
    lines.append("")
    lines.append(report.caution)
    return "\n".join(lines)
