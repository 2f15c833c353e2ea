"""The user's cache folder (compose.user_cache): where it is, and the CRS strings pyproj accepted
before, which later loads take without importing pyproj -- for the same pyproj only."""
from __future__ import annotations

import json

import pytest

from compose import user_cache
from compose.errors import StyleError
from compose.style.model import _crs
from compose.style.validate import Scope


def test_where_the_cache_lives(tmp_path, monkeypatch):
    monkeypatch.setenv("COMPOSE_CACHE", str(tmp_path / "mine"))
    assert user_cache.cache_dir() == tmp_path / "mine"
    assert user_cache.cache_dir(tmp_path / "opt") == tmp_path / "opt"
    for off in ("off", "0", "", "no"):
        monkeypatch.setenv("COMPOSE_CACHE", off)
        assert user_cache.cache_dir() is None
    monkeypatch.delenv("COMPOSE_CACHE")
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg"))
    assert user_cache.cache_dir() == tmp_path / "xdg" / "compose"


def test_a_crs_accepted_once_is_remembered_for_this_pyproj_only(tmp_path, monkeypatch):
    monkeypatch.setenv("COMPOSE_CACHE", str(tmp_path))
    at = Scope("", ("map",)).at("crs")
    assert not user_cache.crs_known("EPSG:32631")
    assert _crs("EPSG:32631", at) == "EPSG:32631"
    assert user_cache.crs_known("EPSG:32631")
    memo = json.loads((tmp_path / "crs.json").read_text())
    assert list(memo["installs"].values()) == [["EPSG:32631"]]
    # another pyproj: the memo no longer counts
    (tmp_path / "crs.json").write_text(json.dumps({"installs": {"0:0": ["EPSG:32631"]}}))
    assert not user_cache.crs_known("EPSG:32631")
    # ... and its list stays beside this one's (environments sharing one cache folder)
    assert _crs("EPSG:32631", at) == "EPSG:32631"
    memo = json.loads((tmp_path / "crs.json").read_text())
    assert memo["installs"]["0:0"] == ["EPSG:32631"] and len(memo["installs"]) == 2
    assert user_cache.crs_known("EPSG:32631")
    (tmp_path / "crs.json").write_text(json.dumps({"installs": {"0:0": ["EPSG:32631"]}}))
    # refused strings are never remembered; a damaged memo is ignored
    with pytest.raises(StyleError, match="not a CRS pyproj understands"):
        _crs("EPSG:99999999", at)
    assert not user_cache.crs_known("EPSG:99999999")
    (tmp_path / "crs.json").write_text("{not json")
    assert not user_cache.crs_known("EPSG:32631")
    assert _crs("EPSG:32631", at) == "EPSG:32631"
    assert user_cache.crs_known("EPSG:32631")


def test_a_crs_pyproj_accepted_here_is_known_in_memory_with_the_cache_off(monkeypatch):
    """compose.sources.crs answers such a string without GDAL (a draft's marks process)."""
    monkeypatch.setenv("COMPOSE_CACHE", "off")
    at = Scope("", ("map",)).at("crs")
    monkeypatch.setattr(user_cache, "_ACCEPTED", set())
    assert not user_cache.accepted("EPSG:32632")
    assert _crs("EPSG:32632", at) == "EPSG:32632"
    assert user_cache.accepted("EPSG:32632") and not user_cache.accepted("EPSG:32633")
    with pytest.raises(StyleError):
        _crs("EPSG:99999999", at)
    assert not user_cache.accepted("EPSG:99999999") and not user_cache.accepted(None)
