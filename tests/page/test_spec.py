"""``[page]`` keys: paper sizes (ISO 216, ANSI), orientation, margins, places, errors."""
from __future__ import annotations

import pytest

from compose.errors import StyleError
from compose.page.spec import PAPER_SIZES, parse_page


@pytest.mark.parametrize("name,size", [
    # ISO 216:2007 table 1 (A series) and table 2 (B series), mm
    ("A0", (841, 1189)), ("A3", (297, 420)), ("A4", (210, 297)), ("A5", (148, 210)),
    ("B4", (250, 353)), ("B5", (176, 250)),
    # ANSI letter and legal: 8.5 x 11 and 8.5 x 14 inches
    ("letter", (215.9, 279.4)), ("legal", (215.9, 355.6)),
])
def test_paper_sizes(name, size):
    assert PAPER_SIZES[name] == pytest.approx(size)


def test_orientation_and_custom_paper():
    assert parse_page({"paper": "a4"}).size == (297.0, 210.0)          # landscape by default
    assert parse_page({"paper": "A4", "orientation": "portrait"}).size == (210.0, 297.0)
    assert parse_page({"paper": [300, 200], "orientation": "portrait"}).size == (200.0, 300.0)


def test_margins_and_places():
    p = parse_page({"margin": [5, 6, 7, 8], "legend": "top left", "north": False,
                    "scalebar": {"units": "imperial", "place": "bottom right"}})
    assert p.margin == (5, 6, 7, 8)
    assert (p.legend, p.north, p.scalebar.place, p.scalebar.units) == \
        ("top left", "off", "bottom right", "imperial")


@pytest.mark.parametrize("table,message", [
    ({"paper": "A11"}, "page.paper: unknown paper 'A11'"),
    ({"paper": [100]}, "page.paper must be a paper name"),
    ({"legend": "middle"}, "'middle' is not a place"),
    ({"scale": -5}, "page.scale"),
    ({"grid": {"crs": "EPSG:4326"}}, "step"),
    ({"colour": "#fff"}, "colour"),
])
def test_bad_keys_name_the_key(table, message):
    with pytest.raises(StyleError, match=message.replace("(", r"\(").replace("[", r"\[")):
        parse_page(table)
