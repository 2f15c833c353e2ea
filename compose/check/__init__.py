"""compose.check: the hierarchy checker.

:func:`check_style` turns a render's statistics (:mod:`compose.check.stats`), the style's budgets
and the built ramps into a :class:`Report` of rule results (:data:`RULES`) and per-layer
summaries. It measures; the CLI and the writers format.
"""
from __future__ import annotations

from compose.check.context import CheckContext
from compose.check.finish import finish_results
from compose.check.legibility import judge
from compose.check.report import CAUTION, FAILURE, WARNING, Change, LayerSummary, Report, RuleResult, format_report
from compose.check.rules import RULES, describe, run_rules

__all__ = ["check_style", "summarise_layers", "CheckContext", "Report", "RuleResult",
           "LayerSummary", "Change", "RULES", "FAILURE", "WARNING", "CAUTION", "format_report",
           "describe"]


def summarise_layers(ctx: CheckContext) -> list[LayerSummary]:
    """Per-layer coverage and L*/C* p5/p50/p95 (themes without their no-data colour); overlays
    also the L* of what lay beneath the judged part and its contrast share."""
    out = []
    for spec, s in ctx.layers():
        L, C = s.lightness_chroma(data_only=spec.role == "theme")
        beneath = share = None
        if spec.role == "overlay":
            j = judge(ctx, spec, s)
            if j is not None:
                beneath, share = tuple(j["beneath"]), j["share"]
        out.append(LayerSummary(spec.name, spec.role, spec.kind, ctx.coverage(s), tuple(L),
                                tuple(C), beneath, share))
    return out


def check_style(style, stats, ramps, rules=None, draft: str | None = None) -> Report:
    """Check a rendered style: ``stats`` from :func:`compose.engine.run`, ``ramps`` the built
    ramps (``RenderRun.ramps``). Returns the :class:`Report` (``passed``: every failure-severity
    rule passed; waived results pass and say why). ``draft``: the reduced size checked, if any."""
    ctx = CheckContext.build(style, stats, ramps)
    results = finish_results(ctx, run_rules(ctx, rules))
    waivers = tuple((w.rule, w.layer, w.reason) for w in getattr(style, "waivers", ()))
    return Report(style=style.name, rules=tuple(results), layers=tuple(summarise_layers(ctx)),
                  waivers=waivers, draft=draft)
