"""Label text size (rule ``label-size``): a labels layer's size in points against
``budget.overlay.text_size`` (6 pt by default: common practice, no source; the value is from
memory), and a fix that applies and passes."""
from __future__ import annotations

from compose.check.catalog import rule_info
from tests.check._maps import apply_change, check, labels, relief, style

HALO = {"color": "#ffffff", "width": 3.0}


def _one(report, layer="towns"):
    got = report.rule("label-size", layer)
    assert len(got) == 1, [r.to_json() for r in report.rules]
    return got[0]


def test_small_text_fails_and_its_fix_passes(data, tmp_path):
    doc = style([relief(data["hills"]), labels(data["towns"], color="#303030", halo=HALO, size=5.0)])
    bad = _one(check(tmp_path, doc, "small"))
    assert not bad.passed and (bad.value, bad.limit) == (5.0, 6.0)
    assert bad.change is not None and bad.change.values == {"size": 6.0}
    assert "5 pt" in bad.message and "px at" in bad.message
    fixed = check(tmp_path, apply_change(doc, bad.change), "fixed")
    assert _one(fixed).passed and _one(fixed).value == 6.0


def test_the_budget_is_the_style_s_and_the_limit_is_not_rounded(data, tmp_path):
    # 5.99 pt is not 6 pt; a style may set its own floor (a wall map, a pocket map)
    doc = style([labels(data["towns"], color="#303030", halo=HALO, size=5.99)])
    assert not _one(check(tmp_path, doc, "edge")).passed
    own = style([labels(data["towns"], color="#303030", halo=HALO, size=5.0)],
                budget={"overlay": {"text_size": 4.5}})
    got = _one(check(tmp_path, own, "own"))
    assert got.passed and got.limit == 4.5 and got.origin == "style"
    assert rule_info("label-size").comparison == ">=" and rule_info("label-size").unit == "pt"


def test_no_labels_no_result(data, tmp_path):
    assert check(tmp_path, style([relief(data["hills"])]), "bare").rule("label-size") == []
