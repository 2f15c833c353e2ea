"""Ground and theme budgets (docs/style.md [budget.*]; common practice, no source), and that the
numeric fixes they suggest, written back into the style, make the rule pass."""
from __future__ import annotations

from tests.check._maps import LAND, apply_change, check, field, relief, style

SATURATED = {"L": 88, "C": 26, "h": 80}


def one(report, rule, layer=None):
    got = report.rule(rule, layer)
    assert len(got) == 1, [r.to_json() for r in report.rules]
    return got[0]


def test_default_relief_passes_ground_rules(data, tmp_path):
    rep = check(tmp_path, style([relief(data["hills"])]))
    for rule in ("ground-lightness", "ground-chroma"):
        r = one(rep, rule, "relief")
        assert r.passed and r.severity == "failure" and r.fix == ""
    assert rep.passed


def test_saturated_ground_fails_and_its_fix_passes(data, tmp_path):
    doc = style([relief(data["hills"], tint=SATURATED)])
    r = one(check(tmp_path, doc), "ground-chroma", "relief")
    assert not r.passed and r.value > 12 and r.limit == 12
    assert "tint chroma from" in r.fix and r.change is not None
    assert r.change.table == 'layer "relief"' and "tint" in r.change.values
    fixed = check(tmp_path, apply_change(doc, r.change), "fixed")
    r2 = one(fixed, "ground-chroma", "relief")
    assert r2.passed and r2.value <= 12


def test_dark_ground_fails_lightness_and_lower_strength_fixes_it(data, tmp_path):
    doc = style([relief(data["hills"], tint="#b0a898", strength=1.0)])
    r = one(check(tmp_path, doc), "ground-lightness", "relief")
    assert not r.passed and r.value[0] < 55
    assert "strength" in r.change.values and r.change.values["strength"] < 1.0
    r2 = one(check(tmp_path, apply_change(doc, r.change), "fixed"), "ground-lightness", "relief")
    assert r2.passed


def test_too_light_ground_fixed_by_a_darker_tint(data, tmp_path):
    doc = style([relief(data["flat"], tint="#ffffff", strength=0.0)])
    r = one(check(tmp_path, doc), "ground-lightness", "relief")
    assert not r.passed and r.value[1] > 98
    assert "tint" in r.change.values
    assert one(check(tmp_path, apply_change(doc, r.change), "fixed"), "ground-lightness").passed


def test_reserved_saturation(data, tmp_path):
    ok = check(tmp_path, style([relief(data["hills"]), field(data["gradient"])]))
    assert one(ok, "reserved-saturation", "relief").passed
    dull = {"kind": "sequential", "domain": [0, 10],
            "through": [{"L": 90, "C": 8, "h": 95}, {"L": 40, "C": 8, "h": 130}]}
    doc = style([relief(data["hills"]), field(data["gradient"], ramp="dull")], {"dull": dull})
    r = one(check(tmp_path, doc, "dull"), "reserved-saturation", "relief")
    assert not r.passed and r.value > r.limit
    assert 'raise the chroma of "val"' in r.fix


def test_reserved_saturation_fix_lowers_the_ground(data, tmp_path):
    # ground C* ~ 30 + 10 > theme p50 ~ 38: lowering the tint's chroma is the suggested change
    doc = style([relief(data["hills"], tint={"L": 85, "C": 32, "h": 80}), field(data["gradient"])])
    r = one(check(tmp_path, doc), "reserved-saturation", "relief")
    assert not r.passed and r.change is not None
    assert one(check(tmp_path, apply_change(doc, r.change), "fixed"), "reserved-saturation").passed


def test_theme_chroma_maximum(data, tmp_path):
    doc = style([relief(data["hills"]), field(data["gradient"])])
    assert one(check(tmp_path, doc), "theme-chroma", "val").passed
    doc["budget"] = {"theme": {"chroma": [0, 30]}}
    r = one(check(tmp_path, doc, "tight"), "theme-chroma", "val")
    assert not r.passed and r.value > 30 and "scale the chroma" in r.fix


def test_theme_chroma_minimum_only_when_stated(data, tmp_path):
    doc = style([relief(data["hills"]), field(data["gradient"])])
    assert check(tmp_path, doc).rule("theme-chroma-min") == []
    doc["budget"] = {"theme": {"chroma": [20, 130]}}
    assert one(check(tmp_path, doc, "low"), "theme-chroma-min", "val").passed
    doc["budget"] = {"theme": {"chroma": [60, 130]}}
    r = one(check(tmp_path, doc, "high"), "theme-chroma-min", "val")
    assert not r.passed and r.value < 60 and r.limit == 60


def test_land_ramp_is_untouched_by_helpers():
    assert LAND["through"][0]["C"] == 25


# --- relief visibility (issue 10: gentle terrain gave an L* spread of ~3 and nothing flagged it)

def test_invisible_relief_fails_and_its_fix_makes_it_show(data, tmp_path):
    doc = style([relief(data["gentle"], shade={"stretch": "none"})])
    rep = check(tmp_path, doc)
    r = one(rep, "relief-visible", "relief")
    assert not r.passed and r.value < 5 and r.limit == 10 and r.comparison == ">="
    assert r.change is not None and r.change.table == 'layer "relief"'
    assert "exaggeration" in r.fix or "strength" in r.fix
    fixed = check(tmp_path, apply_change(doc, r.change), "fixed")
    r2 = one(fixed, "relief-visible", "relief")
    assert r2.passed, r2.message
    assert one(fixed, "ground-lightness", "relief").passed


def test_default_shading_is_normalised_so_gentle_terrain_shows(data, tmp_path):
    rep = check(tmp_path, style([relief(data["gentle"])]))      # shade.stretch = "auto"
    r = one(rep, "relief-visible", "relief")
    assert r.passed and r.value >= 10
    assert rep.passed


def test_relief_budget_from_the_style(data, tmp_path):
    rep = check(tmp_path, style([relief(data["hills"])], budget={"ground": {"relief_spread": 60}}))
    r = one(rep, "relief-visible", "relief")
    assert not r.passed and r.limit == 60 and r.origin == "style"


def test_a_flat_dem_is_not_stretched_into_noise(data, tmp_path):
    rep = check(tmp_path, style([relief(data["flat"])]))
    r = one(rep, "relief-visible", "relief")
    assert not r.passed and r.value == 0 and "waive" in r.fix


# --- relief-visible: a fix where there was none, and the relief as seen under the data (issue 10)

def test_a_dark_tint_gets_a_lighter_tint_and_more_strength(data, tmp_path):
    # tint at L* 55 (the ground's floor, budget.ground.lightness; common practice, no source):
    # any more strength shades below the floor, and exaggeration does not help either. This
    # had no structured fix before (6 of 21 fuzz failures).
    doc = style([relief(data["gentle"], tint="#848484", strength=0.1)])
    r = one(check(tmp_path, doc), "relief-visible", "relief")
    assert not r.passed and r.change is not None
    assert set(r.change.values) >= {"tint", "strength"} and "tint lightness" in r.fix
    fixed = check(tmp_path, apply_change(doc, r.change), "fixed")
    assert one(fixed, "relief-visible", "relief").passed
    assert one(fixed, "ground-lightness", "relief").passed


def test_a_relief_under_opaque_data_is_hidden_and_the_fix_lets_it_show(data, tmp_path):
    # the data drawn normally at full opacity over the whole relief: the reader sees none of it,
    # however well it is shaded (it passed before: the rule read the relief's own colours)
    doc = style([relief(data["hills"]), field(data["scatter"], blend="normal")])
    r = one(check(tmp_path, doc), "relief-visible", "relief")
    assert not r.passed and r.value == 0 and r.message.startswith("hidden: 0.0%")
    assert r.change is not None and r.change.table == 'layer "val"'
    assert r.change.values == {"opacity": 0.85}
    fixed = one(check(tmp_path, apply_change(doc, r.change), "fixed"), "relief-visible", "relief")
    assert fixed.passed and "15%" in fixed.message       # 1 - 0.85 of it shows through


def test_a_relief_half_under_opaque_data_is_judged_where_it_shows(data, tmp_path):
    alone = one(check(tmp_path, style([relief(data["hills"])])), "relief-visible", "relief")
    doc = style([relief(data["hills"]), field(data["west"], blend="normal", nodata="transparent")])
    r = one(check(tmp_path, doc, "half"), "relief-visible", "relief")
    assert r.passed and "where it shows (50% of it)" in r.message
    assert r.value != alone.value                          # the east half's shading only


def test_data_multiplied_over_a_relief_leave_it_judged_as_before(data, tmp_path):
    alone = one(check(tmp_path, style([relief(data["hills"])])), "relief-visible", "relief")
    doc = style([relief(data["hills"]), field(data["scatter"], blend="multiply")])
    r = one(check(tmp_path, doc, "multiplied"), "relief-visible", "relief")
    assert r.value == alone.value and "where it shows" not in r.message
