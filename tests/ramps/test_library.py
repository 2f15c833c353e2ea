"""Our ramp library (compose/ramps/library.toml): every ramp meets the rules of its kind, checked by our
metrics and independently with colour-science on the 8-bit colours drawn; the counter-example in
styles/poor-ramps.toml fails. Limits as in test_build.py (Brychtova & Coltekin 2016 for the
10 dE00 separations; the rest common practice, no source)."""
from __future__ import annotations

import numpy as np
import pytest

from compose.ramps import build_ramps, ramp_metrics, rule_checks

from .conftest import (
    LIBRARY,
    POOR,
    ref_de00,
    ref_lab,
    ref_lch,
    ref_min_pairwise,
    ref_step_cv,
    ref_vision_lab,
    rgb8_of,
    style_ramps,
)

NAMES = ["land-growth", "water-growth", "sea-warmth", "change", "cover", "heights", "depth"]


def test_library_has_the_ramps_the_demo_needs(library):
    assert set(NAMES) <= set(library)
    assert library["water-growth"].twin_of == "land-growth"
    assert library["sea-warmth"].at == 26 and library["sea-warmth"].domain == (14, 30)
    assert library["change"].center == 0 and library["change"].domain == (-4, 4)
    assert library["land-growth"].domain == (0, 12)
    cover = library["cover"]
    assert [c.value for c in cover.classes] == [1, 2, 3, 4, 5, 6, 7, 8]
    fam = {c.value: c.family for c in cover.classes}
    assert fam[1] == fam[2] == fam[3] == "woody" and fam[4] == fam[5] == "farmed"


@pytest.mark.parametrize("name", NAMES)
def test_every_library_ramp_passes_every_rule(library, name):
    checks = rule_checks(ramp_metrics(library[name]))
    failed = [c.message for c in checks if not c.passed]
    assert not failed


@pytest.mark.parametrize("name", ["land-growth", "water-growth", "heights", "depth", "sea-warmth"])
def test_monotone_ramps_by_colour_science(library, name):
    ramp = library[name]
    L = ref_lab(rgb8_of(ramp, np.linspace(*ramp.domain, 64)))[:, 0]
    d = np.diff(L)
    assert np.all(d > 0) or np.all(d < 0)
    if ramp.kind != "threshold":
        assert ref_step_cv(ramp.colors_at(np.linspace(*ramp.domain, 1024))) <= 5.0


def test_twins_by_colour_science(library):
    t = np.linspace(0, 12, 97)
    a, b = ref_lch(rgb8_of(library["land-growth"], t)), ref_lch(rgb8_of(library["water-growth"], t))
    assert np.max(np.abs(a[:, 0] - b[:, 0])) <= 1.0 and np.max(np.abs(a[:, 1] - b[:, 1])) <= 1.0
    hue = b[:, 2]
    assert np.all((hue > 175) & (hue < 245))


def test_change_by_colour_science(library):
    ramp = library["change"]
    d = np.linspace(0, 4, 65)
    lo, hi = ref_lab(rgb8_of(ramp, -d)), ref_lab(rgb8_of(ramp, d))
    assert np.max(np.abs(lo[:, 0] - hi[:, 0])) <= 1.0
    mid = ref_lch(rgb8_of(ramp, [0.0]))[0]
    assert mid[1] <= 5.0 and mid[0] >= 90


def test_sea_warmth_break_by_colour_science(library):
    lut = library["sea-warmth"].lut()
    pair = ref_lab(lut.rgb8[[lut.split[1] - 1, lut.split[1]]].astype(float))
    assert abs(pair[0, 0] - pair[1, 0]) <= 1.0 and ref_de00(pair[0], pair[1]) >= 10


def test_cover_by_colour_science(library):
    rgb8 = library["cover"].lut().rgb8[:8].astype(float)
    for vision in ("normal", "deutan", "protan"):
        assert ref_min_pairwise(ref_vision_lab(rgb8, vision)) >= 10
    assert 5 <= len(library["cover"].classes) <= 9


@pytest.mark.parametrize("name", NAMES)
def test_nodata_by_colour_science(library, name):
    lut = library[name].lut()
    nd = ref_lab(lut.rgb8[[lut.nodata_index]].astype(float))[0]
    assert np.hypot(nd[1], nd[2]) <= 3
    assert np.min(ref_de00(nd, ref_lab(lut.rgb8[:lut.n].astype(float)))) >= 10


def test_bumpy_counter_example_fails():
    ramps = build_ramps(style_ramps(POOR))
    bumpy = ramps["bumpy"]
    verdict = {c.rule: c.passed for c in rule_checks(ramp_metrics(bumpy))}
    assert not verdict["ramp-lightness-monotone"] and not verdict["grayscale-order"]
    d = np.diff(ref_lab(rgb8_of(bumpy, np.linspace(0, 12, 64)))[:, 0])
    assert (d > 0).any() and (d < 0).any()


def test_library_file_is_only_ramps():
    import tomllib
    data = tomllib.loads(LIBRARY.read_text())
    assert set(data) == {"ramp"}
