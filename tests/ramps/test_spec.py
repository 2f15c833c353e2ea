"""Validation of [ramp.NAME] tables: one-line StyleErrors naming the file, the ramp and the key."""
from __future__ import annotations

from pathlib import Path
from types import MappingProxyType

import pytest

from compose.errors import ColorError, StyleError
from compose.ramps import parse_ramp

from .conftest import lch, make

SEQ = {"kind": "sequential", "domain": [0, 12], "through": [lch(95, 10, 100), lch(30, 20, 160)]}


def error(table, name="sea", path="styles/x.toml") -> str:
    with pytest.raises(StyleError) as info:
        parse_ramp(name, table, Path(path))
    message = str(info.value)
    assert "\n" not in message
    return message


def test_unknown_key_suggests_the_close_one():
    table = {"twin": "land", "hues": [200, 240]}
    assert error(table) == "styles/x.toml: ramp \"sea\": unknown key 'hues'; did you mean 'hue'?"


def test_unknown_key_without_a_close_one_lists_the_keys_of_the_kind():
    message = error({**SEQ, "flavour": 1})
    assert message.startswith("styles/x.toml: ramp \"sea\": unknown key 'flavour' for a sequential ramp; one of:")
    assert "through" in message and "center" not in message


def test_key_of_another_kind_is_unknown():
    assert "unknown key 'center'" in error({**SEQ, "center": 3})


@pytest.mark.parametrize("table, part", [
    ({"through": SEQ["through"]}, "missing key 'kind'; one of: sequential, diverging, qualitative, threshold"),
    ({**SEQ, "kind": "sequencial"}, "kind 'sequencial' is not a ramp kind; did you mean 'sequential'?"),
    ({**SEQ, "space": "hsv"}, "space 'hsv' is not an interpolation space; one of: cam02ucs, cielab"),
    ({**SEQ, "domain": [5, 5]}, "'domain' needs two different values"),   # [5, 1] runs high to low
    ({**SEQ, "domain": [0, "x"]}, "'domain' must be a finite number"),
    ({**SEQ, "through": [lch(50, 10, 10)]}, "'through' must be a list of at least 2 colours"),
    ({**SEQ, "samples": 1}, "'samples' must be a whole number from 2 to 65533"),
    ({**SEQ, "samples": True}, "'samples' must be a whole number"),
    ({**SEQ, "steps": 5, "breaks": [2, 4]}, "give either 'steps' or 'breaks', not both"),
    ({**SEQ, "breaks": [4, 2]}, "'breaks' must increase strictly"),
    ({**SEQ, "breaks": [0, 4]}, "'breaks' must lie inside the domain [0, 12]"),
    ({**SEQ, "step_method": "quantile"}, "'step_method' needs 'steps'"),
    ({**SEQ, "steps": 4, "step_method": "jenks"}, "step_method 'jenks' is not a step method; one of: equal, quantile"),
    ({"kind": "diverging", "domain": [-1, 1], "through": [lch(40, 20, 250), lch(95, 0, 0)]},
     "'through' must be a list of at least 3 colours"),
    ({"kind": "diverging", "domain": [-1, 1], "through": [lch(40, 20, 250), lch(95, 0, 0), lch(90, 5, 0),
                                                          lch(40, 20, 50)]},
     "'through' needs an odd number of colours"),
    ({"kind": "diverging", "domain": [-1, 1], "center": 1, "through": [lch(40, 20, 250), lch(95, 0, 0),
                                                                       lch(40, 20, 50)]},
     "'center' = 1 must lie inside the domain [-1, 1]"),
    ({"kind": "threshold", "domain": [0, 1], "below": SEQ["through"], "above": SEQ["through"]},
     "missing key 'at'"),
    ({"kind": "qualitative", "classes": [{"value": 1, "colour": "#fff"}, {"value": 2, "color": "#000"}]},
     "classes[0]: unknown key 'colour'; did you mean 'color'?"),
    ({"kind": "qualitative", "classes": [{"value": 1, "color": "#fff"}, {"value": 1, "color": "#000"}]},
     "classes[1]: value 1 is given twice"),
    ({**SEQ, "outside": "#000"}, "'outside' must be a table { low = colour, high = colour }"),
    ({**SEQ, "outside": {"lo": "#000"}}, "outside: unknown key 'lo'; did you mean 'low'?"),
    ({**SEQ, "outside": {"high": "nope"}}, "outside.high: 'nope' is not a colour"),
    ({**SEQ, "under": "#000"}, "unknown key 'under'"),
    ({"twin": "land", "hue": 200}, "'hue' must be [hue at the low end, hue at the high end]"),
    ({"twin": "land", "hue": [1, 2], "kind": "threshold"}, "a twin has its base's kind"),
])
def test_bad_tables(table, part):
    message = error(table)
    assert message.startswith('styles/x.toml: ramp "sea": ')
    assert part in message


def test_color_outside_srgb_is_an_error_naming_the_stop():
    with pytest.raises(ColorError, match=r'styles/x.toml: ramp "sea": through\[1\]: .* is outside sRGB'):
        parse_ramp("sea", {**SEQ, "through": [lch(95, 10, 100), lch(30, 60, 250)]}, Path("styles/x.toml"))


def test_read_only_copies_are_accepted():
    # The style loader hands over read-only mappings with arrays as tuples.
    table = MappingProxyType({"kind": "sequential", "domain": (0, 1),
                              "through": (MappingProxyType(lch(95, 10, 100)), "#204030")})
    spec = parse_ramp("land", table, Path("x.toml"))
    assert spec.domain == (0.0, 1.0)
    assert spec.through[0] == (95.0, 10.0, 100.0)


def test_defaults():
    spec = parse_ramp("land", {"kind": "sequential", "through": SEQ["through"]}, Path("x.toml"))
    assert (spec.domain, spec.space, spec.samples, spec.steps) == ((0.0, 1.0), "cam02ucs", None, None)
    div = parse_ramp("d", {"kind": "diverging", "domain": [10, 30],
                           "through": [lch(40, 20, 250), lch(95, 0, 0), lch(40, 20, 50)]}, Path("x.toml"))
    assert div.center == 20.0   # the middle of the domain when not given


def test_twin_base_must_exist_and_the_error_lists_the_ramps():
    with pytest.raises(StyleError) as info:
        make(land=SEQ, sea={"twin": "lnd", "hue": [200, 240]})
    assert str(info.value) == "styles/test.toml: ramp \"sea\": twin 'lnd' is not a ramp; ramps: land, sea"


def test_twin_cycle_is_an_error():
    with pytest.raises(StyleError, match="twins form a cycle: a -> b -> a"):
        make(a={"twin": "b", "hue": [1, 2]}, b={"twin": "a", "hue": [1, 2]})


def test_twin_needs_a_sequential_or_diverging_base():
    div = {"kind": "diverging", "domain": [-1, 1], "through": [lch(40, 20, 250), lch(95, 0, 0), lch(40, 20, 50)]}
    assert make(d=div, t={"twin": "d", "hue": [300, 160]})["t"].twin_of == "d"   # see test_diverging_twins
    qual = {"kind": "qualitative", "classes": [{"value": 1, "color": "#000000"}, {"value": 2, "color": "#ffffff"}]}
    with pytest.raises(StyleError, match='twin base "q" is a qualitative ramp; sequential and diverging'):
        make(q=qual, t={"twin": "q", "hue": [1, 2]})
