"""The public Python API: compose.load_style, compose.render, compose.check."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

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


def test_page_keys_can_be_overridden(style_path):
    # the [page] table takes key paths like [map]: a title for one run, a page added from outside
    plain = compose.load_style(style_path)
    assert plain.page is None
    paged = compose.load_style(style_path, overrides={"page.title": "Dry season", "page.paper": "A5"})
    assert paged.page is not None and paged.page.title == "Dry season"
    with pytest.raises(StyleError, match="page.panel"):
        compose.load_style(style_path, overrides={"page.panel": "diagonal"})


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


_FRESH = """
import json, sys, time
import compose, compose.api, compose.packing, compose.page.process as process
started = []
real = process.Forked.__init__
process.Forked.__init__ = lambda self, fn: started.append(1) or real(self, fn)
style = compose.load_style(sys.argv[1], overrides={"map.pixel": 60})   # 750 x 750: 4 windows
one = json.dumps(compose.check(style, cache=False, workers=1).to_json(False))
%s
two = json.dumps(compose.check(style, cache=False, workers=2).to_json(False))
print(json.dumps({"same": two == one, "started": len(started)}))
"""


def _in_a_fresh_process(patch: str) -> dict:
    """Run a 1-worker and a 2-worker check of the coarse demo in a fresh interpreter, as a
    command runs them (this test process has threads by now, which forbid forking), with
    ``patch`` applied between the two; returns whether the reports match and the forks made."""
    import json

    demo = Path(__file__).resolve().parents[1] / "styles" / "coast.toml"
    out = subprocess.run([sys.executable, "-c", _FRESH % patch, str(demo)],
                         capture_output=True, text=True, check=True, timeout=120)
    return json.loads(out.stdout.strip().splitlines()[-1])


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the helpers are forked on Linux")
def test_a_failing_helper_has_its_windows_walked_by_the_check():
    """A helper that cannot send its windows' statistics (here: packing them fails in the
    helper, the only process that packs) leaves them to the check itself: the same report."""
    got = _in_a_fresh_process(
        "def broken(obj):\n    raise RuntimeError('no packing in this test')\n"
        "compose.packing.pack = broken")
    assert got == {"same": True, "started": 1}


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the helpers are forked on Linux")
def test_a_stuck_helper_is_ended_and_its_windows_walked_by_the_check():
    """A helper that sends nothing (here: stuck in its packing) for longer than the check's
    patience (compose.api.HELPER_PATIENCE, or 4 x the check's own walk) is ended and its
    windows walked by the check: the same report, no hang."""
    got = _in_a_fresh_process(
        "compose.packing.pack = lambda obj: time.sleep(3600)\n"
        "compose.api.HELPER_PATIENCE = 0.2")
    assert got == {"same": True, "started": 1}


def test_vector_reads_start_once_the_engine_and_the_layer_modules_are_imported():
    """A check reads its vector layers on threads while it prepares the rest, but imports the
    engine and its layer kinds' modules first: SQLite gives up Python's lock for every row, and
    a thread importing beside the reads took it back each time (our own measurements, see the
    commit). In a fresh interpreter, as a command runs (a module imported earlier would hide
    the order)."""
    code = """
import json, sys
import compose.api, compose.sources.vector as vector
seen = []
real = vector.read_early
def spy(*a, **k):
    seen.append([m in sys.modules for m in ("compose.engine", "compose.layers.vector",
                                            "compose.layers.relief", "compose.layers.label_layer")])
    return real(*a, **k)
vector.read_early = spy
compose.api.check("styles/coast.toml", cache=False, workers=1)
print(json.dumps(seen))
"""
    root = Path(__file__).resolve().parents[1]
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=root)
    seen = json.loads(out.stdout.strip().splitlines()[-1])
    assert seen and all(all(s) for s in seen), seen
