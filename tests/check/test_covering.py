"""A haze drawn over one twin only (issue 10): the fix makes the covering layer fainter -- it
does not leave the user without a change -- and applying that change makes the twin rules on
the map pass. A haze mixes its colour in by its opacity (W3C Compositing and Blending Level 1,
source-over); the lightness it shifts is checked here with colour-science (CIE 15:2004 L*).
Limits: budget.ramp.map_lightness 2 L*, map_chroma 3 C*ab (our design target, no source)."""
from __future__ import annotations

import colour
import numpy as np
import pytest

from compose.color.parse import parse_color
from tests.check._maps import N, _vector, apply_change, check, xy
from tests.check.test_on_map import one, twins

NEUTRAL = {"tint": {"L": 95, "C": 0, "h": 0}}


def _hazed(folder, data, fill, opacity, blend="normal"):
    """A ground area over the east half (the sea twin only), drawn after the twins."""
    east = [({"type": "Polygon", "coordinates": [[xy(N / 2, 0), xy(N, 0), xy(N, N),
                                                  xy(N / 2, N), xy(N / 2, 0)]]}, {"name": "e"})]
    src = _vector(folder / "east_area.gpkg", "Polygon", east, {"name": "str"})
    doc = twins(data, ground=NEUTRAL)
    doc["layer"].append({"name": "haze", "role": "ground", "kind": "areas", "source": str(src),
                         "fill": fill, "opacity": opacity, "blend": blend})
    return doc


@pytest.mark.parametrize("fill, opacity, blend", [("#8c8c8c", 0.4, "normal"),
                                                  ("#f0f0f0", 0.3, "normal"),
                                                  ("#b4c8dc", 0.25, "normal"),
                                                  ("#a0a0a0", 0.5, "multiply")])
def test_a_haze_over_one_twin_gets_a_fainter_opacity_that_passes(data, tmp_path, fill, opacity,
                                                                 blend):
    doc = _hazed(tmp_path, data, fill, opacity, blend)
    rep = check(tmp_path, doc, "haze")
    failed = [r for r in rep.rules if r.rule in ("twin-lightness-map", "twin-chroma-map")
              and not r.passed]
    assert failed, [r.message for r in rep.rules if r.rule.startswith("twin")]
    for bad in failed:
        assert bad.change is not None and bad.change.table == 'layer "haze"', bad.fix
        assert set(bad.change.values) == {"opacity"} and bad.change.values["opacity"] < opacity
        assert "fainter" in bad.fix or "vanish" in bad.fix
        fixed = check(tmp_path, apply_change(doc, bad.change), "haze-fixed")
        assert one(fixed, bad.rule).passed, one(fixed, bad.rule).message
    # the changes of both rules applied, as compose fix's rounds would: both pass
    first = apply_change(doc, failed[0].change)
    again = [r for r in check(tmp_path, first, "haze-1").rules if r.rule in
             ("twin-lightness-map", "twin-chroma-map") and not r.passed]
    final = check(tmp_path, apply_change(first, again[0].change) if again else first, "haze-2")
    for rule in ("twin-lightness-map", "twin-chroma-map"):
        assert one(final, rule).passed, one(final, rule).message


def test_the_haze_shift_is_what_source_over_predicts():
    # the lightness a grey haze at opacity 0.4 moves a light yellow by, computed from the
    # source-over mix in encoded sRGB and converted by colour-science: the shift the rule sees
    # is the reader's, and it shrinks about in proportion to the opacity (the fix's estimate)
    under = np.array([0.93, 0.90, 0.62])
    haze = np.asarray(parse_color("#8c8c8c"))

    def L(rgb):
        return colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb))[0]

    shifts = [abs(L((1 - a) * under + a * haze) - L(under)) for a in (0.4, 0.2, 0.1, 0.05)]
    assert shifts[0] > 10
    ratios = np.array(shifts[1:]) / shifts[0] / np.array([0.5, 0.25, 0.125])
    assert np.all(np.abs(ratios - 1) < 0.15)


def test_layers_that_together_hide_the_relief_get_one_made_fainter(data, tmp_path):
    # data at opacity 0.8 and a haze at 0.8 over all of it: each lets a fifth through, together
    # 4 % of the relief shows (< 5 %: hidden), yet neither alone is above 0.85
    whole = [({"type": "Polygon", "coordinates": [[xy(0, 0), xy(N, 0), xy(N, N), xy(0, N),
                                                   xy(0, 0)]]}, {"name": "all"})]
    src = _vector(tmp_path / "whole.gpkg", "Polygon", whole, {"name": "str"})
    from tests.check._maps import field, relief, style
    doc = style([relief(data["hills"]), field(data["west"], opacity=0.8, nodata="#d0d0d0"),
                 {"name": "haze", "role": "ground", "kind": "areas", "source": str(src),
                  "fill": "#e8e8e8", "opacity": 0.8}])
    bad = one(check(tmp_path, doc, "hidden"), "relief-visible")
    assert not bad.passed and bad.value == 0.0 and "hidden" in bad.message
    assert bad.change is not None and set(bad.change.values) == {"opacity"}, bad.fix
    assert bad.change.values["opacity"] < 0.8
    fixed = one(check(tmp_path, apply_change(doc, bad.change), "shown"), "relief-visible")
    assert fixed.passed, fixed.message
