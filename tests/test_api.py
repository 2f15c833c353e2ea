"""The public Python API: compose.load_style, compose.render, compose.check."""
from __future__ import annotations

import subprocess
import sys

import pytest

import compose
from compose.errors import StyleError
from tests.output._tiny import tiny_style


@pytest.fixture(scope="module")
def style_path(tmp_path_factory):
    return tiny_style(tmp_path_factory.mktemp("api") / "data", extra=False)


def test_import_is_light():
    # `compose --help` imports the package: the API must not pull numpy, rasterio or matplotlib
    code = "import sys, compose; print(sorted(m for m in ('numpy', 'rasterio', 'matplotlib') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_load_style_with_overrides(style_path):
    plain = compose.load_style(style_path)
    coarse = compose.load_style(style_path, overrides={"map.pixel": plain.map.pixel * 2})
    assert isinstance(coarse, compose.Style)
    assert coarse.canvas().width == pytest.approx(plain.canvas().width / 2, abs=1)
    name = plain.layers[-1].name
    hidden = compose.load_style(style_path, overrides={f"layer.{name}.enabled": False})
    assert name in [s.name for s in plain.layers if s.enabled]
    assert name not in [s.name for s in hidden.layers if s.enabled]


@pytest.mark.parametrize("key, value, words", [
    ("layer.nowhere.width", 1.0, 'no layer named "nowhere"'),
    ("pixel", 60, "key path starts with"),
    ("map.pixel", -5, "map.pixel"),                      # checked like a written value
])
def test_bad_overrides_are_style_errors(style_path, key, value, words):
    with pytest.raises(StyleError, match=words):
        compose.load_style(style_path, overrides={key: value})


def test_check_and_render_agree(style_path, tmp_path):
    style = compose.load_style(style_path)
    report = compose.check(style)
    assert isinstance(report, compose.CheckReport)
    result = compose.render(style, tmp_path, html=False)
    assert isinstance(result, compose.RenderResult)
    assert result.outputs["png"].exists() and result.outputs["check"].exists()
    assert [(r.rule, r.layer, r.passed) for r in report.rules] == \
        [(r.rule, r.layer, r.passed) for r in result.report.rules]
    assert compose.check(style_path).passed == report.passed     # a path works too


def test_check_is_still_the_checker_package():
    import compose.check as package
    from compose.check import check_style

    assert package is compose.check and callable(compose.check)
    assert check_style is package.check_style
