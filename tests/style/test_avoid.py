"""A labels layer's ``avoid``: names of enabled lines or areas layers, checked when the style
loads (one-line StyleError with the key path); the command exits 2."""
from __future__ import annotations

import pytest

from compose.errors import StyleError
from compose.style import load_style

LAYERS = """
[[layer]]
name   = "roads"
role   = "overlay"
kind   = "lines"
source = "v.gpkg"
table  = "roads"

[[layer]]
name    = "tracks"
role    = "overlay"
kind    = "lines"
source  = "v.gpkg"
enabled = false

[[layer]]
name   = "lakes"
role   = "overlay"
kind   = "areas"
source = "v.gpkg"

[[layer]]
name   = "towns"
role   = "overlay"
kind   = "points"
source = "v.gpkg"

[[layer]]
name   = "town names"
role   = "overlay"
kind   = "labels"
source = "v.gpkg"
text   = "name"
"""


def test_avoid_names_lines_and_areas_layers(style):
    s = load_style(style(LAYERS + 'avoid = ["roads", "lakes"]\n'))
    (labels,) = [l for l in s.layers if l.kind == "labels"]
    assert labels.options.avoid == ("roads", "lakes")
    s = load_style(style(LAYERS))
    assert [l.options.avoid for l in s.layers if l.kind == "labels"] == [()]


@pytest.mark.parametrize("avoid, message", [
    ('["roads", "rods"]', 'layer "town names": avoid: no lines or areas layer named '
                          '"rods"; lines and areas layers: roads, lakes'),
    ('["towns"]', 'layer "town names": avoid: layer "towns" is a points layer; avoid needs a '
                  'lines or areas layer; lines and areas layers: roads, lakes'),
    ('["town names"]', 'layer "town names": avoid: layer "town names" is a labels layer'),
    ('"roads"', 'layer "town names": avoid must be a list of layer names'),
    ('["roads", "roads"]', "layer \"town names\": avoid: 'roads' named more than once"),
])
def test_avoid_errors(style, avoid, message):
    with pytest.raises(StyleError) as err:
        load_style(style(LAYERS + f"avoid = {avoid}\n"))
    assert str(err.value).split("style.toml: ", 1)[1].startswith(message)
    assert "\n" not in str(err.value)


def test_a_disabled_layer_named_is_passed_over(style):
    """A style that extends another may turn off a layer its labels keep off (or
    ``--set layer.NAME.enabled=false``): nothing is drawn there to keep off, so no error."""
    s = load_style(style(LAYERS + 'avoid = ["roads", "tracks"]\n'))
    (labels,) = [l for l in s.layers if l.kind == "labels"]
    assert labels.options.avoid == ("roads", "tracks")


def test_avoid_is_a_labels_key_only(style):
    body = LAYERS.replace('table  = "roads"', 'table  = "roads"\navoid  = ["lakes"]')
    with pytest.raises(StyleError, match="'avoid' is a key of labels layers, not lines"):
        load_style(style(body))


def test_the_command_exits_2(style):
    from click.testing import CliRunner

    from compose.cli.group import cli

    result = CliRunner().invoke(cli, ["check", str(style(LAYERS + 'avoid = ["rods"]\n'))])
    assert result.exit_code == 2
    assert 'avoid: no lines or areas layer named "rods"' in result.output
