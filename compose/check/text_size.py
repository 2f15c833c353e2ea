"""Label text large enough to read (rule ``label-size``).

A label layer's text size, in typographic points (1/72 inch) as printed at the map's dpi, must be
at least ``budget.overlay.text_size`` (default 6 pt: the usual floor for type on printed maps;
common practice, no source -- the value is from memory). On screen the same label is
``size * dpi / 72`` pixels tall (em size), which the message states too. The fix is the smallest
size that meets the budget. The rule reads the style only, so a draft check gives the full
check's verdict.
"""
from __future__ import annotations

from compose.check.context import CheckContext, layer_key
from compose.check.report import Change, RuleResult

__all__ = ["RULE", "label_size"]

RULE = "label-size"


def label_size(ctx: CheckContext) -> list[RuleResult]:
    """One result per drawn labels layer: its text size (pt) against the budget (pt)."""
    limit = float(ctx.budgets.overlay.text_size)
    dpi = ctx.dpi
    out = []
    for spec in ctx.specs.values():
        if spec.kind != "labels":
            continue
        size = float(spec.options.size)
        passed = size >= limit
        msg = (f"text {size:g} pt ({size * dpi / 72:.1f} px at {dpi:g} dpi); the smallest "
               f"readable size on paper is taken as {limit:g} pt")
        fix, change = "", None
        if not passed:
            fix = f"raise the text size from {size:g} to {limit:g} pt"
            change = Change(layer_key(spec.name), {"size": limit})
        out.append(RuleResult(RULE, spec.name, size, limit, passed, msg, fix, change=change))
    return out
