"""Fixtures of the checker tests: the tiny sources, written once per session."""
from __future__ import annotations

import pytest

from tests.check._maps import make_data


@pytest.fixture(scope="session")
def data(tmp_path_factory):
    """name -> path of the tiny GeoTIFFs / GeoPackages (see tests/check/_maps.py)."""
    return make_data(tmp_path_factory.mktemp("sources"))
