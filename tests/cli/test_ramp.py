"""`compose ramp NAME --style FILE`: table, --json, --plot, errors (click.testing.CliRunner).

The L*, C*, h printed are checked against colour-science on the printed hex colours.
"""
from __future__ import annotations

import json
from pathlib import Path

import colour
import numpy as np
import pytest
from click.testing import CliRunner

import compose.style
from compose.cli.main import cli

LIBRARY = Path(__file__).resolve().parents[2] / "compose" / "ramps" / "library.toml"


@pytest.fixture(autouse=True)
def _loader(monkeypatch):
    """Use compose.style.load_style; only if it is missing, a tiny temporary tomllib loader."""
    if not hasattr(compose.style, "load_style"):
        from tests.ramps.conftest import _tiny_loader

        class _Style:
            def __init__(self, path):
                self.ramps = _tiny_loader(Path(path))
        monkeypatch.setattr(compose.style, "load_style", lambda p, require_map=True: _Style(p), raising=False)


def run(*args):
    return CliRunner().invoke(cli, ["ramp", *args])


def test_table_shows_samples_metrics_and_rules():
    result = run("land-growth", "--style", str(LIBRARY))
    assert result.exit_code == 0, result.output
    lines = result.output.splitlines()
    assert lines[0].startswith('ramp "land-growth": sequential, domain 0 to 12')
    rows = [ln for ln in lines if ln.strip().split(" ")[0].replace(".", "").isdigit() and "#" in ln]
    assert len(rows) == 11
    assert "metrics" in lines and "rules" in lines
    assert any("ramp-lightness-monotone" in ln and ln.strip().startswith("ok") for ln in lines)


def test_samples_option_sets_the_rows():
    result = run("depth", "--style", str(LIBRARY), "--samples", "5")
    rows = [ln for ln in result.output.splitlines() if "#" in ln]
    assert len(rows) == 5


@pytest.mark.parametrize("name", ["land-growth", "sea-warmth", "change"])
def test_json_keys_and_values(name):
    result = run(name, "--style", str(LIBRARY), "--json", "--samples", "17")
    assert result.exit_code == 0, result.output
    rows = json.loads(result.output)
    assert len(rows) == 17
    assert all(set(r) == {"value", "hex", "L", "C", "h"} for r in rows)
    codes = np.array([[int(r["hex"][i:i + 2], 16) for i in (1, 3, 5)] for r in rows]) / 255.0
    # colour-science: CIE LCh(ab), D65, of the 8-bit hex colour; tolerance 0.01 (ours agrees to
    # ~1e-3, the output is rounded to 3 decimals)
    ref = colour.Lab_to_LCHab(colour.XYZ_to_Lab(colour.sRGB_to_XYZ(codes)))
    got = np.array([[r["L"], r["C"], r["h"]] for r in rows])
    np.testing.assert_allclose(got[:, :2], ref[:, :2], atol=0.01)
    chromatic = ref[:, 1] > 1
    dh = (got[chromatic, 2] - ref[chromatic, 2] + 180) % 360 - 180
    assert np.max(np.abs(dh)) < 0.05
    values = [r["value"] for r in rows]
    assert values[0] == rows[0]["value"] and values == sorted(values)


def test_json_of_a_qualitative_ramp_has_one_object_per_class():
    rows = json.loads(run("cover", "--style", str(LIBRARY), "--json").output)
    assert [r["value"] for r in rows] == [1, 2, 3, 4, 5, 6, 7, 8]
    assert rows[0]["label"] == "Conifer forest" and rows[0]["family"] == "woody"


@pytest.mark.parametrize("name", ["water-growth", "cover", "sea-warmth"])
def test_plot_writes_a_png(tmp_path, name):
    out = tmp_path / f"{name}.png"
    result = run(name, "--style", str(LIBRARY), "--plot", str(out), "--units", "g C m-2 day-1")
    assert result.exit_code == 0, result.output
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert [p.name for p in tmp_path.iterdir()] == [out.name]     # no temporary file left


def test_unknown_ramp_lists_the_ramps_and_exits_2():
    result = run("land-grow", "--style", str(LIBRARY))
    assert result.exit_code == 2
    err = result.stderr.strip()
    assert "\n" not in err
    assert err.startswith("compose: error: ") and 'no ramp "land-grow"' in err
    assert "change, cover, depth, heights, land-growth, sea-warmth, water-growth" in err


def test_style_errors_are_one_line_and_exit_2(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('[ramp.sea]\ntwin = "land"\nhues = [200, 240]\n')
    result = run("sea", "--style", str(bad))
    assert result.exit_code == 2
    assert "unknown key 'hues'; did you mean 'hue'?" in result.stderr
