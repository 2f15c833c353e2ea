"""Report: passed/failure/warning semantics, the JSON object, the terminal table, the registry."""
from __future__ import annotations

import json

import pytest

from compose.check import RULES, Report, RuleResult, describe, format_report
from compose.check.report import CAUTION, LayerSummary
from tests.check._maps import check, lines, relief, style


def _r(rule, passed, severity="failure", met=True):
    return RuleResult(rule, "x", 1.0, 2.0, passed, f"{rule} message", "" if passed else "do this",
                      severity=severity, met=met)


def test_passed_ignores_warnings():
    rep = Report("s", (_r("a", True), _r("w", True, "warning", met=False)), ())
    assert rep.passed and len(rep.warnings) == 1 and rep.failures == ()
    rep = Report("s", (_r("a", False),), ())
    assert not rep.passed and rep.failures[0].rule == "a"
    with pytest.raises(ValueError):
        RuleResult("a", None, 1.0, 1.0, True, "", severity="info")


def test_caution_matches_render():
    from compose.render import CAUTION as RENDER_CAUTION
    assert CAUTION == RENDER_CAUTION


def test_json_object_shape(data, tmp_path):
    rep = check(tmp_path, style([relief(data["hills"]), lines(data["coast"], stroke="#c8c8c8",
                                                            width=1.5)]))
    obj = json.loads(json.dumps(rep.to_json()))
    assert obj["passed"] is False and obj["caution"] == CAUTION
    keys = {"rule", "layer", "passed", "value", "limit", "message", "fix", "severity"}
    for r in obj["rules"]:
        assert keys <= set(r) and r["severity"] in ("failure", "warning")
    bad = next(r for r in obj["rules"] if r["rule"] == "overlay-contrast")
    assert bad["passed"] is False and bad["fix"] and bad["change"]["table"] == 'layer "coast"'
    names = [s["name"] for s in obj["layers"]]
    assert names == ["relief", "coast"]
    ground, coast = obj["layers"]
    for s in obj["layers"]:
        for key in ("lightness", "chroma"):
            assert set(s[key]) == {"p5", "p50", "p95"}
        assert 0 < s["coverage"] <= 1
    assert "beneath" not in ground and set(coast["beneath"]["lightness"]) == {"p5", "p50", "p95"}
    assert 0 <= coast["contrast_share"] < 0.95


def test_table_lists_failures_first_and_ends_with_the_caution(data, tmp_path):
    rep = check(tmp_path, style([relief(data["hills"]), lines(data["coast"], stroke="#c8c8c8",
                                                            width=1.5)]))
    text = format_report(rep, width=120)
    assert "FAIL" in text and text.index("FAIL") < text.index("pass")
    assert "FIX:" in text and "L* p5/p50/p95" in text
    assert text.rstrip().endswith(CAUTION)


def test_every_rule_is_documented():
    docs = describe()
    assert set(docs) == set(RULES) and all(docs.values())


def test_layer_summary_json_handles_nan():
    s = LayerSummary("a", "overlay", "lines", 0.0, (float("nan"),) * 3, (1.0, 2.0, 3.0))
    obj = s.to_json()
    assert obj["lightness"]["p5"] is None and obj["beneath"] == {"lightness": None}
