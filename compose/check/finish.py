"""Finishing a check: catalogue facts on every result, the current value beside every proposed
change, waivers, and what was not judged.

Rules measure and compare; this module only annotates their results so every report (table,
JSON, HTML page, ``compose fix``) says the same thing.
"""
from __future__ import annotations

import dataclasses
import re
from typing import Any

import numpy as np

from compose.check.catalog import CATALOG, limit_of
from compose.check.context import CheckContext
from compose.check.report import WARNING, Change, RuleResult

__all__ = ["finish_results", "roles_present", "current_value", "style_value"]

_TABLE = re.compile(r'^(layer|ramp) "([^"]+)"(?:\.(\w+)\[(\d+)\])?$')


def style_value(value: Any) -> Any:
    """A parsed style value as it would be written in TOML: colours (3 floats) as ``#rrggbb``,
    halo tables as ``{color, width}``, tuples as lists."""
    from compose.color.parse import to_hex

    if value is None:
        return None
    if dataclasses.is_dataclass(value):
        return {f.name: style_value(getattr(value, f.name)) for f in dataclasses.fields(value)}
    if isinstance(value, tuple) and len(value) == 3 and all(isinstance(v, float) for v in value) \
            and all(0.0 <= v <= 1.0 for v in value):
        return to_hex(np.asarray(value, dtype=float))
    if isinstance(value, (tuple, list)):
        return [style_value(v) for v in value]
    if hasattr(value, "items"):
        return {k: style_value(v) for k, v in value.items()}
    return value


def current_value(style, table: str, key: str) -> Any:
    """The value ``key`` of style table ``table`` (``layer "x"``, ``ramp "y"``,
    ``ramp "y".classes[2]``) has now, as TOML would write it (None when not set)."""
    m = _TABLE.match(table)
    if not m:
        return None
    kind, name, listkey, index = m.groups()
    if kind == "layer":
        spec = next((s for s in style.layers if s.name == name), None)
        if spec is None:
            return None
        target = spec.options if hasattr(spec.options, key) else spec
        return style_value(getattr(target, key, None))
    ramp = style.ramps.get(name)
    if ramp is None:
        return None
    t: Any = ramp.table
    if listkey is not None:
        items = t.get(listkey) or ()
        t = items[int(index)] if int(index) < len(items) else {}
    return style_value(t.get(key))


def _with_old(style, change: Change | None) -> Change | None:
    if change is None or change.old:
        return change
    old = {k: current_value(style, change.table, k) for k in change.values}
    return dataclasses.replace(change, old=old)


def _waiver(style, r: RuleResult) -> str | None:
    subjects = [s.strip() for s in (r.layer or "").split(",")]
    for w in getattr(style, "waivers", ()):
        if w.rule == r.rule and w.layer in subjects:
            return w.reason
    return None


def finish_results(ctx: CheckContext, results: list[RuleResult]) -> list[RuleResult]:
    """Catalogue facts (comparison, unit, budget key and its origin), the current value of every
    change, and waivers (a waived result passes and says why) on every result."""
    out = []
    for r in results:
        info = CATALOG.get(r.rule)
        kw: dict[str, Any] = {"change": _with_old(ctx.style, r.change)}
        if info is not None:
            _, origin, key = limit_of(r.rule, ctx.budgets)
            kw.update(comparison=info.comparison, unit=info.unit, budget=key, origin=origin)
        reason = _waiver(ctx.style, r)
        if reason is not None:
            kw.update(waived=reason, passed=True)
        out.append(dataclasses.replace(r, **kw))
    return out


def roles_present(ctx: CheckContext) -> list[RuleResult]:
    """A warning when no layer is judged as ground or none as theme: the rules of that role were
    not applied (rather than silently passing with fewer results)."""
    roles = {spec.role for spec in ctx.specs.values()}
    out = []
    for role, rules in (("ground", "ground-lightness, ground-chroma, relief-visible, "
                                   "reserved-saturation"),
                        ("theme", "theme-chroma, reserved-saturation, grayscale-order, "
                                  "nodata and class rules")):
        if role in roles:
            continue
        kinds = "relief, field, classes, areas" if role == "ground" else "field, classes"
        out.append(RuleResult("roles-present", None, 0, 1, True,
                              f"no layer is judged as {role}; not applied: {rules}",
                              f'give the layer meant as the {role} role = "{role}" (kinds that '
                              f"can be {role}: {kinds})", severity=WARNING, met=False))
    return out
