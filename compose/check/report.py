"""Results of the hierarchy check: one :class:`RuleResult` per rule and subject, a per-layer
:class:`LayerSummary`, the :class:`Report` that holds them, its JSON form and its terminal table.

Computation lives in :mod:`compose.check.rules`; this module only holds and formats numbers.
"""
from __future__ import annotations

import math
import re
import shutil
import textwrap
from dataclasses import dataclass, field
from typing import Any

from compose.caution import CAUTION

__all__ = ["FAILURE", "WARNING", "SEVERITIES", "SCHEMA", "Change", "RuleResult", "LayerSummary",
           "Report", "format_report", "format_pair", "CAUTION"]

#: Version of the JSON report (NAME.check.json, ``compose check --json``). 2: per-rule verdict,
#: comparison, unit, budget origin, structured change, waivers, notes.
SCHEMA = 2

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


_TABLE = re.compile(r'^(layer|ramp) "([^"]+)"(.*)$')


@dataclass(frozen=True, slots=True)
class Change:
    """A concrete edit of the style that the fix proposes, machine-readable.

    table: the style table to edit, e.g. ``layer "relief"``, ``ramp "land"`` or an element of a
    ramp's list, ``ramp "cover".classes[2]``; values: key -> new value as written in TOML (a
    ``"#rrggbb"`` string, a number, an ``{L, C, h}`` or halo table, a list); old: key -> the
    value the style has now (filled in when the report is finished, see
    :func:`compose.check.finish.finish_results`).
    """

    table: str
    values: dict
    old: dict = field(default_factory=dict)

    def edits(self) -> list[dict]:
        """One ``{layer | ramp, key, old, new}`` per key (key relative to the layer or ramp)."""
        m = _TABLE.match(self.table)
        kind, name, rest = (m.groups() if m else ("table", self.table, ""))
        prefix = rest.lstrip(".")
        out = []
        for key, new in self.values.items():
            out.append(_clean({"layer": name if kind == "layer" else None,
                               "ramp": name if kind == "ramp" else None,
                               "key": f"{prefix}.{key}" if prefix else key,
                               "old": self.old.get(key), "new": new}))
        return out

    def to_json(self) -> list[dict]:
        return self.edits()


@dataclass(frozen=True, slots=True)
class RuleResult:
    """One rule applied to one subject (a layer, or a ramp and the layers using it).

    value / limit: the measured number (unrounded) and the bound it is compared with;
    passed: False only when a *failure*-severity rule is not met (a warning always passes);
    fix: what to change, in numbers ('' when passed); change: the same as an edit, when one
    key can be named; ramp: the ramp judged, for ramp rules. comparison, unit, budget (the
    ``budget.*`` key of the limit) and origin (``style`` / ``default`` / ``fixed``) come from the
    rule catalogue (:mod:`compose.check.catalog`); waived: the reason of a ``[[waive]]``.
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
    comparison: str = ""
    unit: str = ""
    budget: str | None = None
    origin: str = ""
    waived: str | None = None

    def __post_init__(self) -> None:
        if self.severity not in SEVERITIES:
            raise ValueError(f"severity must be one of {SEVERITIES}, got {self.severity!r}")
        if self.severity == FAILURE and not self.passed:
            object.__setattr__(self, "met", False)   # met: did the condition hold

    @property
    def verdict(self) -> str:
        """``pass``, ``warn``, ``fail`` or ``waived`` (a waived rule is reported, not applied)."""
        if self.waived is not None:
            return "waived"
        if self.severity == WARNING:
            return "pass" if self.met else "warn"
        return "pass" if self.passed else "fail"

    def to_json(self) -> dict:
        return _clean({"rule": self.rule, "layer": self.layer, "ramp": self.ramp,
                       "verdict": self.verdict, "passed": self.passed, "severity": self.severity,
                       "value": self.value, "comparison": self.comparison, "limit": self.limit,
                       "unit": self.unit, "budget": self.budget, "origin": self.origin,
                       "message": self.message, "fix": self.fix,
                       "change": None if self.change is None else self.change.to_json(),
                       "waived": self.waived})


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
    waivers: tuple = ()          # (rule, layer, reason) of every [[waive]] of the style
    notes: tuple[str, ...] = ()  # what was not judged and why
    draft: str | None = None     # "WxH of FULLxFULL" when checked at reduced resolution

    @property
    def passed(self) -> bool:
        """True when every failure-severity rule passed (warnings never fail a map)."""
        return all(r.passed for r in self.rules)

    def passed_strict(self, strict: bool = False) -> bool:
        """:attr:`passed`, and with ``strict`` also no warning."""
        return self.passed and not (strict and self.warnings)

    @property
    def failures(self) -> tuple[RuleResult, ...]:
        return tuple(r for r in self.rules if not r.passed)

    @property
    def warnings(self) -> tuple[RuleResult, ...]:
        return tuple(r for r in self.rules if r.severity == WARNING and not r.met)

    def rule(self, rule: str, layer: str | None = None) -> list[RuleResult]:
        """The results of rule id ``rule`` (optionally of one layer)."""
        return [r for r in self.rules if r.rule == rule and (layer is None or r.layer == layer)]

    def to_json(self, strict: bool = False) -> dict:
        """The object written as NAME.check.json and printed by ``compose check --json``."""
        return {"schema": SCHEMA, "passed": self.passed_strict(strict), "strict": strict,
                "style": self.style, "draft": self.draft,
                "counts": {v: sum(r.verdict == v for r in self.rules)
                           for v in ("pass", "warn", "fail", "waived")},
                "rules": [r.to_json() for r in self.rules],
                "waivers": [{"rule": w[0], "layer": w[1], "reason": w[2]} for w in self.waivers],
                "notes": list(self.notes),
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


def _default_decimals(v: float) -> int:
    a = abs(v)
    return 1 if a >= 10 else (2 if a >= 1 else 3)


def _holds(a: float, b: float, comparison: str) -> bool:
    return a >= b if comparison == ">=" else a <= b


def _g(v) -> str:
    return f"{v:g}" if isinstance(v, float) else str(v)


def format_pair(value, limit, comparison: str, met: bool) -> tuple[str, str]:
    """(value, limit) as text with enough decimals that the printed numbers compare the way the
    unrounded ones do: a failing 0.9496 against ``>= 0.95`` prints ``0.9496``, never ``0.950``."""
    if (not isinstance(value, (int, float)) or not isinstance(limit, (int, float))
            or isinstance(value, bool) or comparison not in (">=", "<=")
            or not (math.isfinite(value) and math.isfinite(limit))):
        return _num(value), _num(limit)
    for decimals in range(_default_decimals(value), 10):
        printed = f"{value:.{decimals}f}"
        if _holds(float(printed), float(limit), comparison) == met:
            shown = _g(limit) if float(limit) == round(float(limit), 3) else f"{limit:.{decimals}f}"
            return printed, shown
    return repr(float(value)), _g(limit)


def _order(r: RuleResult) -> int:
    return {"fail": 0, "warn": 1, "waived": 2}.get(r.verdict, 3)


def _table(rows: list[list[str]], widths: list[int]) -> list[str]:
    lines = []
    for row in rows:
        cells = [textwrap.wrap(c, w) or [""] for c, w in zip(row, widths)]
        for i in range(max(len(c) for c in cells)):
            lines.append("  ".join((c[i] if i < len(c) else "").ljust(w)
                                   for c, w in zip(cells, widths)).rstrip())
    return lines


def format_report(report: Report, width: int | None = None, strict: bool = False) -> str:
    """Readable text: rules (failures, then warnings, then passes), per-layer L*/C*, caution."""
    width = width or max(100, min(160, shutil.get_terminal_size((120, 24)).columns))
    rules = sorted(report.rules, key=_order)
    fixed = [26, 16, 11, 13, 6]
    last = max(30, width - sum(fixed) - 2 * len(fixed))
    head = ["rule", "layer", "measured", "limit", "", "message / fix"]
    rows = [head, ["-" * w for w in fixed + [last]]]
    for r in rules:
        text = r.message + (f"  FIX: {r.fix}" if r.fix else "")
        if r.waived is not None:
            text = f"WAIVED ({r.waived}): " + text
        subject = r.layer or (f"ramp {r.ramp}" if r.ramp else "-")
        value, limit = format_pair(r.value, r.limit, r.comparison, r.met)
        if r.comparison in (">=", "<="):
            limit = f"{r.comparison} {limit}"
        verdict = "FAIL" if r.verdict == "fail" else r.verdict
        rows.append([r.rule, subject, value, limit, verdict, text])
    lines = _table(rows, fixed + [last])
    n_fail, n_warn = len(report.failures), len(report.warnings)
    verdict = "PASSED" if report.passed_strict(strict) else "FAILED"
    lines.append("")
    draft = f" (draft at {report.draft})" if report.draft else ""
    lines.append(f"{report.style}: {verdict}{draft} -- {len(report.rules)} results, {n_fail} "
                 f"failed, {n_warn} warning(s){' (--strict: warnings fail)' if strict else ''}")
    for rule, layer, reason in report.waivers:
        lines.append(f'waived: {rule} for layer "{layer}": {reason}')
    for note in report.notes:
        lines.append(f"note: {note}")
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
