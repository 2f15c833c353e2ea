"""The distribution is named compose-maps (the import package and the command are compose)."""

from importlib.metadata import PackageNotFoundError, metadata, version

import pytest
from click.testing import CliRunner

import compose
from compose.cli.main import cli


def test_distribution_name_and_version_agree_with_the_package():
    try:
        meta = metadata("compose-maps")
    except PackageNotFoundError:  # pragma: no cover - only when run from an uninstalled tree
        pytest.skip("compose-maps is not installed")
    assert meta["Name"] == "compose-maps"
    assert version("compose-maps") == compose.__version__
    # PEP 639: the licence is an SPDX expression, not a table
    assert meta["License-Expression"] == "MIT"


def test_version_option_names_the_command_and_the_distribution():
    result = CliRunner().invoke(cli, ["--version"])
    assert result.exit_code == 0
    assert result.output.strip() == f"compose {compose.__version__} (distribution compose-maps)"
