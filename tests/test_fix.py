"""Fixes that work (issue 10): every change the counter-example's failures propose is displayable,
loads, and applied alone makes its own rule pass on a re-check at reduced size; ``compose fix``
applies them all and writes a style that passes, its comments and layout kept."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import tomlkit
from click.testing import CliRunner

from compose.api import check
from compose.cli.main import cli
from compose.color.gamut import lch_in_gamut
from compose.color.lab import srgb_to_lch
from compose.color.parse import parse_color
from compose.fix import apply_change, fix_style
from compose.style import load_style

STYLES = Path(__file__).resolve().parents[1] / "styles"
POOR = STYLES / "poor.toml"


def _colors(value):
    """Every colour written in a change value (hex strings and {L, C, h} tables)."""
    if isinstance(value, str) and value.startswith("#"):
        yield ("hex", value)
    elif isinstance(value, dict) and set(value) == {"L", "C", "h"}:
        yield ("lch", value)
    elif isinstance(value, dict):
        for v in value.values():
            yield from _colors(v)
    elif isinstance(value, list):
        for v in value:
            yield from _colors(v)


@pytest.fixture(scope="module")
def poor_draft():
    return check(POOR, draft=True)


def test_every_fix_is_in_gamut_loads_and_passes_its_rule(poor_draft, tmp_path):
    style = load_style(POOR)
    text = POOR.read_text(encoding="utf-8")
    failed = poor_draft.failures
    assert {r.rule for r in failed} >= {"ground-chroma", "overlay-contrast", "nodata-chroma",
                                        "ramp-lightness-monotone", "ramp-step-uniformity"}
    for r in failed:
        assert r.change is not None, f"{r.rule} proposes no change"
        for kind, c in _colors(r.change.values):
            if kind == "hex":
                parse_color(c)                        # a valid sRGB colour string
            else:
                assert bool(lch_in_gamut(np.array([c["L"], c["C"], c["h"]]))), (r.rule, c)
        doc = tomlkit.parse(text)
        apply_change(doc, style, r.change)
        path = POOR.parent / f".test-fix-{r.rule}.toml"
        try:
            path.write_text(tomlkit.dumps(doc), encoding="utf-8")
            again = check(path, draft=True)           # loads (a bad value would raise here)
        finally:
            path.unlink()
        mine = [x for x in again.rule(r.rule) if x.layer == r.layer]
        if r.rule == "grayscale-order":
            # a ramp whose lightness turns back cannot be ordered by any relief setting: its fix
            # respaces the ramp, and order then also needs the relief quieter (a later round)
            assert mine[0].value > r.value
            continue
        assert mine and all(x.passed for x in mine), (r.rule, r.change, mine[0].message)


def test_halo_fix_is_near_the_ground_and_keeps_the_stroke(poor_draft):
    r = poor_draft.rule("overlay-contrast", "coast")[0]
    halo = r.change.values["halo"]["color"]
    from compose.color.lab import srgb_to_lch
    L, C, h = srgb_to_lch(np.asarray(parse_color(halo)))
    assert C <= 10.5                                  # muted like the ground, not a saturated ring
    assert "stroke" not in r.change.values           # the overlay's own colour is kept


def test_compose_fix_writes_a_style_that_passes(tmp_path):
    out = tmp_path / "fixed.toml"
    res = CliRunner().invoke(cli, ["fix", str(POOR), "--write", str(out)])
    assert res.exit_code == 0, res.output
    assert "the fixed style passes" in res.output and "+tint" in res.output
    text = out.read_text(encoding="utf-8")
    assert text.startswith("# A deliberately poor style")       # comments kept
    assert "# a saturated orange ground competes with the data" in text
    final = check(out)                                          # full resolution
    assert final.passed, [x.rule for x in final.failures]
    assert CliRunner().invoke(cli, ["check", str(out)]).exit_code == 0
    # the sea (36 % of the map, no-data of the land layer) recedes: a light neutral near the
    # white paper, not the dark grey the neutrality rules alone would accept (rule nodata-quiet)
    sea = load_style(out).layers[1].options.nodata
    L, C, _ = srgb_to_lch(np.asarray(sea))
    assert L > 75 and C <= 3
    assert final.rule("nodata-quiet")[0].value is not None


def test_compose_fix_without_write_only_shows_the_diff(tmp_path):
    before = sorted(p.name for p in POOR.parent.iterdir())
    res = CliRunner().invoke(cli, ["fix", str(POOR)])
    assert res.exit_code == 0, res.output
    assert res.output.startswith("--- poor.toml")
    assert sorted(p.name for p in POOR.parent.iterdir()) == before


def test_compose_fix_into_a_folder_it_cannot_make_is_a_one_line_error(tmp_path):
    # a --write path under a regular file: exit 2 naming the folder, nothing left beside it
    (tmp_path / "a-file").write_text("x")
    res = CliRunner().invoke(cli, ["fix", str(POOR), "--write", str(tmp_path / "a-file" / "f.toml")])
    assert res.exit_code == 2, res.output
    assert "cannot create output folder" in res.output and "Traceback" not in res.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["a-file"]


def test_fix_style_of_a_passing_style_changes_nothing():
    r = fix_style(STYLES / "cover.toml")
    assert not r.changed and r.after.passed and r.rounds == []


def test_overlays_are_fixed_on_the_settled_ground():
    # the coast's contrast is judged against what lies beneath it: compose fix first settles
    # the ground, the data and the no-data colour (rounds without an overlay change), then
    # judges the coast on them -- here a darker stroke of its own hue (colour-science LCh,
    # CIE 15:2004) rather than a casing chosen against the old green sea
    import colour
    result = fix_style(POOR)
    assert result.after.passed
    first = [c.table for c in result.rounds[0].changes]
    assert 'layer "coast"' not in first and first
    coast = next(t for t in tomlkit.parse(result.text)["layer"] if t["name"] == "coast")
    stroke = coast["stroke"]
    rgb = np.asarray(parse_color(stroke)) if isinstance(stroke, str) else None
    if rgb is not None:                                  # the stroke changed: its hue is kept
        h = colour.Lab_to_LCHab(colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb)))[2]
        assert abs((h - 220 + 180) % 360 - 180) <= 5
    assert "halo" not in coast or rgb is None
