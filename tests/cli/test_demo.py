"""``compose demo``: the demo region is copied into the output folder (no silent no-op)."""
from __future__ import annotations

from click.testing import CliRunner

from compose.cli.main import cli
from compose.demo import demo_folders


def test_demo_folders_found():
    styles, region = demo_folders()
    assert (styles / "coast.toml").is_file() and (region / "vectors.gpkg").is_file()


def test_data_only_copies_the_region(tmp_path):
    result = CliRunner().invoke(cli, ["demo", "--data-only", "--out", str(tmp_path)])
    assert result.exit_code == 0, result.output
    copied = sorted(p.name for p in (tmp_path / "demo_region").iterdir())
    assert {"elevation.tif", "anomaly.tif", "vectors.gpkg", "README.md"} <= set(copied)
    assert not any(n.endswith(".py") for n in copied)
    assert "compose init" in result.output
    again = CliRunner().invoke(cli, ["demo", "--data-only", "--out", str(tmp_path)])
    assert "(0 file(s) copied" in again.output
