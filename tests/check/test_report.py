"""Report: passed/failure/warning semantics, the JSON object, the terminal table, the registry."""
from __future__ import annotations

import json

import pytest

from compose.check import RULES, Report, RuleResult, describe, format_report
from compose.check.report import CAUTION, SCHEMA, LayerSummary, format_pair
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
    assert obj["schema"] == SCHEMA == 2
    assert obj["passed"] is False and obj["caution"] == CAUTION
    keys = {"rule", "layer", "passed", "verdict", "value", "comparison", "limit", "unit", "budget",
            "origin", "message", "fix", "severity", "change"}
    for r in obj["rules"]:
        assert keys <= set(r) and r["severity"] in ("failure", "warning")
        assert r["verdict"] in ("pass", "warn", "fail")
        assert r["comparison"] in (">=", "<=", "in") and r["unit"]
        assert r["origin"] in ("style", "default", "fixed")
    bad = next(r for r in obj["rules"] if r["rule"] == "overlay-contrast")
    assert bad["verdict"] == "fail" and bad["passed"] is False and bad["fix"]
    assert bad["comparison"] == ">=" and bad["unit"] == "share"
    assert bad["budget"] == "budget.overlay.share" and bad["origin"] == "default"
    # the value is unrounded: exactly the share the rule compared
    assert bad["value"] == next(r.value for r in rep.rules if r.rule == "overlay-contrast")
    # a structured change: layer, key, old and new value, no prose to parse
    (edit, *_) = bad["change"]
    assert edit["layer"] == "coast" and edit["ramp"] is None
    assert edit["key"] in ("stroke", "halo") and edit["new"] != edit["old"]
    if edit["key"] == "stroke":
        assert edit["old"] == "#c8c8c8"
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


def test_budget_origin_says_style_when_the_style_states_it(data, tmp_path):
    rep = check(tmp_path, style([relief(data["hills"]), lines(data["coast"], stroke="#c8c8c8",
                                                            width=1.5)],
                                budget={"overlay": {"share": 0.9}}))
    r = rep.rule("overlay-contrast")[0]
    assert r.limit == 0.9 and r.origin == "style" and r.budget == "budget.overlay.share"


@pytest.mark.parametrize("value, limit, comparison, met, shown", [
    (0.9496, 0.95, ">=", False, "0.9496"),     # never "0.950 >= 0.95 FAIL"
    (0.95, 0.95, ">=", True, "0.950"),
    (12.04, 12.0, "<=", False, "12.04"),       # never "12.0 <= 12 FAIL"
    (11.96, 12.0, "<=", True, "12.0"),         # rounding up to the limit is fine when it holds
    (2.9999, 3.0, ">=", False, "2.9999"),      # WCAG: thresholds are not rounded
])
def test_printed_value_never_looks_like_it_meets_its_limit(value, limit, comparison, met, shown):
    printed, _ = format_pair(value, limit, comparison, met)
    assert printed == shown
    holds = float(printed) >= limit if comparison == ">=" else float(printed) <= limit
    assert holds == met


def test_table_rounding_of_a_near_miss():
    near = RuleResult("grayscale-order", "x", 0.9496, 0.95, False, "m", "f", comparison=">=",
                      unit="rho", met=False)
    text = format_report(Report("s", (near,), ()), width=140)
    assert "0.9496" in text and "0.950 " not in text and ">= 0.95" in text


def _waive_doc(data, **waive):
    doc = style([relief(data["hills"]), lines(data["coast"], stroke="#c8c8c8", width=1.5)])
    doc["waive"] = [dict({"rule": "overlay-contrast", "layer": "coast",
                          "reason": "a faint coast is meant here"}, **waive)]
    return doc


def test_a_waiver_is_applied_and_shown_in_every_report(data, tmp_path):
    rep = check(tmp_path, _waive_doc(data))
    r = rep.rule("overlay-contrast", "coast")[0]
    assert r.verdict == "waived" and r.passed and r.waived == "a faint coast is meant here"
    assert rep.passed
    text = format_report(rep, width=140)
    assert 'waived: overlay-contrast for layer "coast": a faint coast is meant here' in text
    obj = rep.to_json()
    assert obj["waivers"] == [{"rule": "overlay-contrast", "layer": "coast",
                               "reason": "a faint coast is meant here"}]
    assert obj["counts"]["waived"] == 1


@pytest.mark.parametrize("waive, part", [
    ({"rule": "overlay-contrastt"}, "waive 1: rule: 'overlay-contrastt' is not a rule id"),
    ({"layer": "coastt"}, "waive 1: layer: no drawn layer 'coastt'"),
    ({"reason": " "}, "waive 1: reason must be a non-empty string"),
])
def test_bad_waivers_are_style_errors(data, tmp_path, waive, part):
    from compose.errors import StyleError
    with pytest.raises(StyleError, match=part):
        check(tmp_path, _waive_doc(data, **waive))
