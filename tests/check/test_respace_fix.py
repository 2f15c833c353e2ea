"""The fix of a sequential ramp whose lightness turns back (issue 10): it keeps the hues the user
chose. The respaced stops keep each stop's own hue in the user's order, lightness runs one way,
between two stops the built ramp's hue runs from the one stop's hue to the next's without a
detour, and the built ramp passes the evenness rule. Hues, lightness and CAM02-UCS are measured
here with colour-science (CIE 15:2004 CIELAB/LCh; Luo, Cui & Li 2006 CAM02-UCS), not with the
package's own conversions. The evenness limit (10 %) is our design target, no source."""
from __future__ import annotations

from pathlib import Path

import colour
import numpy as np
import pytest

from compose.ramps import RampSpec, build_ramp
from tests.check._maps import apply_change, check, field, relief, style
from tests.check.test_ramp_rules import one
from tests.ramps.test_metrics import ref_evenness

# the counter-example's ramp (styles/poor-ramps.toml): L* 85 -> 45 -> 75 -> 35 -> 70
BUMPY = {"kind": "sequential", "domain": [0, 12],
         "through": [{"L": 85, "C": 30, "h": 95}, {"L": 45, "C": 45, "h": 140},
                     {"L": 75, "C": 55, "h": 60}, {"L": 35, "C": 45, "h": 20},
                     {"L": 70, "C": 35, "h": 300}]}
WAVY = {"kind": "sequential", "domain": [0, 10],
        "through": [{"L": 85, "C": 30, "h": 95}, {"L": 45, "C": 40, "h": 130},
                    {"L": 70, "C": 40, "h": 150}]}


def _lch_reference(rgb: np.ndarray) -> np.ndarray:
    """CIE LCh(ab) of sRGB floats by colour-science (D65)."""
    return colour.Lab_to_LCHab(colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb)))


def _arc_gap(a, b):
    return (np.asarray(b) - np.asarray(a) + 180.0) % 360.0 - 180.0


def _assert_hue_path_kept(user: list[dict], new: list[dict], domain) -> None:
    assert [t["h"] for t in new] == [float(t["h"]) for t in user]           # every hue kept
    L = [t["L"] for t in new]
    assert np.all(np.diff(L) < 0) or np.all(np.diff(L) > 0)                   # one way
    ramp = build_ramp(RampSpec("new", "sequential", Path("x.toml"), "cam02ucs", tuple(domain),
                               through=tuple((t["L"], t["C"], t["h"]) for t in new)))
    v = np.linspace(*domain, 2049)
    lch = _lch_reference(ramp.colors_at(v))
    stops_lab = colour.LCHab_to_Lab(np.array([[t["L"], t["C"], t["h"]] for t in new]))
    at = [int(np.argmin(colour.delta_E(colour.XYZ_to_Lab(colour.sRGB_to_XYZ(ramp.colors_at(v))),
                                       s, method="CIE 2000"))) for s in stops_lab]
    assert at == sorted(at)                                                  # stops in order
    for i in range(len(new) - 1):
        turn = _arc_gap(new[i]["h"], new[i + 1]["h"])
        seg = lch[at[i]:at[i + 1] + 1]
        seg = seg[seg[:, 1] >= 3]                     # where a hue shows at all
        moved = _arc_gap(new[i]["h"], seg[:, 2])      # how far from the first stop's hue
        # the hue stays on the short arc between the two stops' hues (2 degrees of slack for
        # 8-bit rounding and the nearest sample taken for a stop), and runs one way along it
        assert np.all(moved * np.sign(turn) >= -2.0) and np.all(np.abs(moved) <= abs(turn) + 2.0)
        assert np.all(np.diff(moved) * np.sign(turn) >= -1.0)
    assert ref_evenness(ramp) <= 10.0


def test_the_respaced_bumpy_ramp_keeps_the_users_hues(data, tmp_path):
    doc = style([relief(data["hills"]), field(data["gradient"], ramp="bumpy")], {"bumpy": BUMPY})
    rep = check(tmp_path, doc, "bumpy")
    for rule in ("ramp-lightness-monotone", "ramp-step-uniformity"):
        bad = one(rep, rule, "val")
        assert not bad.passed and bad.change is not None
        new = bad.change.values["through"]
        _assert_hue_path_kept(BUMPY["through"], new, BUMPY["domain"])
        assert "hue kept" in bad.fix and "chroma lowered" in bad.fix    # hues turn back here
    fixed = check(tmp_path, apply_change(doc, one(rep, "ramp-step-uniformity", "val").change),
                  "bumpy-fixed")
    for rule in ("ramp-lightness-monotone", "ramp-step-uniformity", "grayscale-order"):
        assert one(fixed, rule, "val").passed


def test_a_ramp_whose_hues_run_one_way_keeps_its_chroma(data, tmp_path):
    doc = style([relief(data["hills"]), field(data["gradient"], ramp="wavy")], {"wavy": WAVY})
    bad = one(check(tmp_path, doc, "wavy"), "ramp-lightness-monotone", "val")
    new = bad.change.values["through"]
    _assert_hue_path_kept(WAVY["through"], new, WAVY["domain"])
    assert [t["C"] for t in new] == [30.0, 40.0, 40.0] and "chroma kept" in bad.fix


def test_the_fix_of_a_reversed_ramp_is_written_in_the_files_order(data, tmp_path):
    """``reverse = true`` builds the ramp from the listed stops in the opposite order: the respaced
    stops must be listed the way the file lists them, or applying the fix flips the ramp."""
    wavy = dict(WAVY, reverse=True)
    doc = style([relief(data["hills"]), field(data["gradient"], ramp="wavy")], {"wavy": wavy})
    before = build_ramp(RampSpec("b", "sequential", Path("x.toml"), "cam02ucs", (0.0, 10.0),
                                 through=tuple((t["L"], t["C"], t["h"])
                                               for t in WAVY["through"][::-1])))
    bad = one(check(tmp_path, doc, "wavy-reversed"), "ramp-lightness-monotone", "val")
    new = bad.change.values["through"]
    assert [t["h"] for t in new] == [float(t["h"]) for t in WAVY["through"]]   # listing kept
    fixed_doc = apply_change(doc, bad.change)
    assert fixed_doc["ramp"]["wavy"]["reverse"] is True
    fixed = check(tmp_path, fixed_doc, "wavy-reversed-fixed")
    for rule in ("ramp-lightness-monotone", "ramp-step-uniformity"):
        assert one(fixed, rule, "val").passed
    # the drawn ramp still runs the same way: hue at the domain's low end near the last listed
    # stop's (150 degrees), at the high end near the first's (95), measured by colour-science
    from compose.ramps.spec import parse_ramp
    spec = parse_ramp("wavy", fixed_doc["ramp"]["wavy"], Path("x.toml"))
    after = build_ramp(spec)
    for ramp in (before, after):
        low, high = _lch_reference(ramp.colors_at(np.array([0.0, 10.0])))
        assert abs(_arc_gap(150.0, low[2])) < 10.0 and abs(_arc_gap(95.0, high[2])) < 10.0


def test_the_fix_of_a_ramp_with_pinned_values_spaces_lightness_by_value(data, tmp_path):
    """Stops pinned to data values [0, 8, 10]: lightness placed in proportion to each stop's value,
    so equal data steps read evenly and the fixed ramp passes (evenness 10 % is our target)."""
    pinned = dict(WAVY, values=[0, 8, 10])
    pinned.pop("domain")
    doc = style([relief(data["hills"]), field(data["gradient"], ramp="pinned")], {"pinned": pinned})
    bad = one(check(tmp_path, doc, "pinned"), "ramp-lightness-monotone", "val")
    new = bad.change.values["through"]
    L = [t["L"] for t in new]
    assert L[0] - L[1] == pytest.approx(4.0 * (L[1] - L[2]), abs=0.2)       # 8 units vs 2
    fixed = check(tmp_path, apply_change(doc, bad.change), "pinned-fixed")
    for rule in ("ramp-lightness-monotone", "ramp-step-uniformity"):
        assert one(fixed, rule, "val").passed
