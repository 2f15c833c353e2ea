"""The relief-shift rule (issue 10): a shaded light class must not read as an unshaded darker
class. Limit budget.theme.relief_overlap (0.10; common practice, no source); classes told apart
by hue (>= 10 dE00 at equal L*, Brychtova & Coltekin 2016) are not compared."""
from __future__ import annotations

from tests.check._maps import apply_change, check, field, relief, style


def one(report, rule, layer=None):
    got = report.rule(rule, layer)
    assert len(got) == 1, [r.to_json() for r in report.rules]
    return got[0]


def greens(light_L=70, dark_L=55, h2=140):
    """Four classes; classes 2 and 3 differ by lightness only (same hue) unless h2 turns."""
    return {"kind": "qualitative", "classes": [
        {"value": 1, "label": "one", "color": {"L": 85, "C": 25, "h": 60}},
        {"value": 2, "label": "light green", "color": {"L": light_L, "C": 30, "h": 140}},
        {"value": 3, "label": "dark green", "color": {"L": dark_L, "C": 30, "h": h2}},
        {"value": 4, "label": "blue", "color": {"L": 45, "C": 35, "h": 260}}]}


def classes(src):
    return {"name": "cover", "role": "theme", "kind": "classes", "source": str(src),
            "ramp": "cover", "blend": "multiply"}


def test_flat_ground_shifts_nothing(data, tmp_path):
    rep = check(tmp_path, style([relief(data["flat"]), classes(data["classes"])],
                                {"cover": greens()}))
    r = one(rep, "relief-shift", "cover")
    assert r.passed and r.value == 0.0


def test_strong_shading_makes_a_light_class_read_as_the_darker_one_and_the_fix_works(data, tmp_path):
    doc = style([relief(data["hills"], strength=1.0, tint={"L": 95, "C": 0, "h": 0},
                        shadow={"L": 20, "C": 0, "h": 0}), classes(data["classes"])],
                {"cover": greens()})
    rep = check(tmp_path, doc, "steep")
    bad = one(rep, "relief-shift", "cover")
    assert not bad.passed and bad.value > 0.1
    assert '"light green"' in bad.message and '"dark green"' in bad.message
    assert bad.change.table == 'layer "relief"' and bad.change.values["strength"] < 1.0
    assert "strength from 1 to" in bad.fix
    fixed = check(tmp_path, apply_change(doc, bad.change), "steep-fixed")
    assert one(fixed, "relief-shift", "cover").passed
    # the same shading is no confusion when the two classes differ in hue
    turned = style(doc["layer"], {"cover": greens(h2=30)})
    turned["layer"] = doc["layer"]
    r = one(check(tmp_path, turned, "turned"), "relief-shift", "cover")
    assert r.passed


def test_a_continuous_ramp_is_judged_in_fifths(data, tmp_path):
    doc = style([relief(data["hills"], strength=1.0, tint={"L": 95, "C": 0, "h": 0},
                        shadow={"L": 20, "C": 0, "h": 0}), field(data["gradient"], blend="multiply")])
    bad = one(check(tmp_path, doc, "field"), "relief-shift", "val")
    assert not bad.passed and ".." in bad.message           # classes named by their value range
    ok = one(check(tmp_path, style([relief(data["flat"]), field(data["gradient"])]), "flat"),
             "relief-shift", "val")
    assert ok.passed


def test_no_relief_no_rule(data, tmp_path):
    rep = check(tmp_path, style([field(data["gradient"])]))
    assert rep.rule("relief-shift") == []
