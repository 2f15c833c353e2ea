"""compose.layers.label_text measures and outlines label text with FreeType alone: the same
boxes as matplotlib's Agg backend (RendererAgg.get_text_width_height_descent, the reference)
and the same outlines as its TextPath, bit for bit; the font matplotlib would pick is
remembered in the user's cache folder and asked again when a file it came from changes."""
from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest

from compose.errors import StyleError
from compose.layers import label_text

TEXTS = ["Harbour", "Río Verde", "AVATAR Wy", "fi ffl", "Łódź Straße", "g C m\u207b\u00b2",
         "1,024 m", "cost \\$5", "$x^2$", "a$b", " ", "", "\u2026", "\u65e5\u672c"]


@pytest.mark.parametrize("weight", ["normal", "bold"])
@pytest.mark.parametrize("size", [0.5, 6.5, 10.0 / 3.0 * 4, 24.0])
def test_outlines_are_textpaths(size, weight):
    """Every glyph outline as matplotlib's TextPath gives it, bit for bit (kerning, ligature
    fonts' plain glyphs, a glyph the font lacks drawn from the Last Resort font, mathtext)."""
    import warnings

    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextPath

    prop = FontProperties(family="DejaVu Sans", weight=weight, size=size)
    for text in TEXTS:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")          # the glyphs DejaVu Sans lacks
            v, codes = label_text.text_outline(text, size, "DejaVu Sans", weight)
            if not text.strip():                     # TextPath fails on nothing to draw
                assert v.shape == (0, 2) and len(codes) == 0
                continue
            tp = TextPath((0.0, 0.0), text, size=size, prop=prop)
        ref = np.asarray(tp.vertices, np.float64)
        assert v.shape == ref.shape and v.tobytes() == ref.tobytes(), text
        assert np.array_equal(codes, np.asarray(tp.codes)), text


@pytest.mark.parametrize("weight", ["normal", "bold"])
@pytest.mark.parametrize("size", [0.5, 6.5, 9.25, 13.0])
def test_boxes_are_the_backends(size, weight):
    """The text box (width, height, descent in pixels) is the Agg backend's at 72 dpi."""
    import warnings

    from matplotlib.backends.backend_agg import RendererAgg
    from matplotlib.font_manager import FontProperties

    face = label_text.face("DejaVu Sans", weight)
    renderer = RendererAgg(1, 1, 72.0)
    for text in TEXTS:
        if "$" in text:
            continue                                 # the backend lays mathtext out itself
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ours = label_text._text_extent(text, size, face)
            ref = renderer.get_text_width_height_descent(
                text, FontProperties(family="DejaVu Sans", weight=weight, size=size), False)
        assert ours == tuple(ref), text


def test_an_unknown_font_is_a_style_error():
    with pytest.raises(StyleError, match="No Such Font"):
        label_text.measure_text("x", 10.0, font="No Such Font Family 123")


_MEASURE = textwrap.dedent("""
    import hashlib, json, sys, warnings
    from compose.layers import label_text
    from compose.errors import StyleError
    h = hashlib.sha256()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for text in ("Harbour", "Río Verde", "AVATAR", "\\u65e5"):
            if text == "\\u65e5":     # a glyph the font lacks: matplotlib warns of it
                loaded = "matplotlib" in sys.modules
            for weight in ("normal", "bold"):
                s = label_text.measure_text(text, 7.25, "DejaVu Sans", weight)
                h.update(repr((s.width, s.ascent, s.descent)).encode())
                h.update(s.vertices.tobytes() + s.codes.tobytes())
    try:
        label_text.measure_text("x", 7.0, "No Such Font Family 123")
        missing = "found"
    except StyleError:
        missing = "error"
    print(json.dumps({"matplotlib": loaded, "hash": h.hexdigest(),
                      "missing": missing}))
""")


def _measure(cwd, cache) -> dict:
    env = dict(os.environ, COMPOSE_CACHE=str(cache))
    out = subprocess.run([sys.executable, "-c", _MEASURE], cwd=cwd, env=env, check=True,
                         capture_output=True, text=True)
    return json.loads(out.stdout)


def test_the_font_is_remembered_and_asked_again_when_a_file_changes(tmp_path):
    """The first run asks matplotlib and remembers; the next measures the same bytes without
    importing it; a configuration file matplotlib would read (here the current folder's
    matplotlibrc, changing the hinting) makes it ask again, with matplotlib's own answer, and so
    does that file's going; a damaged memo is asked again too. A missing font is a StyleError
    either way."""
    cache, run = tmp_path / "cache", tmp_path / "run"
    run.mkdir()
    first = _measure(run, cache)
    assert first["matplotlib"] and first["missing"] == "error"
    assert (cache / label_text.MEMO_FILE).is_file()
    second = _measure(run, cache)
    assert not second["matplotlib"] and second["hash"] == first["hash"]
    assert second["missing"] == "error"

    (run / "matplotlibrc").write_text("text.hinting: no_hinting\n")
    third = _measure(run, cache)
    reference = _measure(run, "off")                    # matplotlib's own answer there
    assert third["matplotlib"] and third["hash"] == reference["hash"] != first["hash"]
    (run / "matplotlibrc").unlink()                     # gone again: asked again, remembered
    assert [(r["matplotlib"], r["hash"]) for r in (_measure(run, cache), _measure(run, cache))] \
        == [(True, first["hash"]), (False, first["hash"])]

    (cache / label_text.MEMO_FILE).write_text("{not json")
    again = _measure(run, cache)
    assert again["matplotlib"] and again["hash"] == first["hash"]


_CHECK = textwrap.dedent("""
    import json, sys
    from compose.api import check
    from compose.demo import styles_dir
    from compose.layers.label_layer import measures_text
    from compose.style import load_style
    style = load_style(styles_dir() / "coast.toml")
    asks = measures_text(style)
    report = check(style, cache=False)
    print(json.dumps({"asks": asks, "matplotlib": "matplotlib" in sys.modules,
                      "report": report.to_json()}, sort_keys=True))
""")


def test_a_demo_check_with_labels_loads_no_matplotlib_once_remembered(tmp_path):
    """The coast style's check (town and river names) measures its labels without importing
    matplotlib once the font is remembered, with the same report; a render then no longer loads
    the text modules before it forks its page process (measures_text)."""
    env = dict(os.environ, COMPOSE_CACHE=str(tmp_path))
    runs = [json.loads(subprocess.run([sys.executable, "-c", _CHECK], env=env, check=True,
                                      capture_output=True, text=True).stdout.splitlines()[-1])
            for _ in range(2)]
    assert runs[0]["asks"] and runs[0]["matplotlib"]
    assert not runs[1]["asks"] and not runs[1]["matplotlib"]
    assert runs[0]["report"] == runs[1]["report"]


def test_settings_a_program_changed_are_not_remembered(tmp_path):
    """matplotlib's answer under settings a program changed while running (not its
    configuration files') is used but not remembered for later processes."""
    code = ("import matplotlib\nmatplotlib.rcParams['text.hinting'] = 'no_hinting'\n"
            "from compose.layers import label_text\nlabel_text.measure_text('Harbour', 7.0)\n")
    subprocess.run([sys.executable, "-c", code], env=dict(os.environ, COMPOSE_CACHE=str(tmp_path)),
                   check=True, capture_output=True)
    assert not (tmp_path / label_text.MEMO_FILE).exists()
    first = _measure(tmp_path, tmp_path)
    assert first["matplotlib"] and (tmp_path / label_text.MEMO_FILE).is_file()


@pytest.mark.parametrize("props", [
    {"family": "DejaVu Sans"}, {"family": "DejaVu Sans", "weight": "bold"},
    {"family": ["sans-serif"]}, {"family": "monospace", "style": "italic"},
    {"family": ["No Such Font Family 123", "DejaVu Serif", "DejaVu Sans"]},
    {"family": ["No Such Font Family 123"]},
])
def test_the_public_font_list_is_the_font_managers(props):
    """The fonts found through matplotlib's public ``findfont`` one family at a time are the
    list its font manager's ``_find_fonts_by_props`` gives (the reference, where this
    matplotlib still has it), in order, with the default family's for none found; the Last
    Resort font's path from the public ``get_data_path`` is the one ``cbook._get_data_path``
    gives."""
    import logging

    from matplotlib import cbook
    from matplotlib.font_manager import FontProperties, fontManager

    reference = getattr(fontManager, "_find_fonts_by_props", None)
    if reference is None:
        pytest.skip("this matplotlib has no _find_fonts_by_props to compare with")
    prop = FontProperties(**props)
    logging.getLogger("matplotlib.font_manager").disabled = True    # its missing-family warnings
    try:
        assert label_text._family_fonts(prop, fontManager) == reference(prop)
    finally:
        logging.getLogger("matplotlib.font_manager").disabled = False
    getter = getattr(cbook, "_get_data_path", None)
    if getter is not None:
        last = label_text._live("DejaVu Sans", "normal").last_resort
        assert last == os.path.realpath(getter("fonts", "ttf", "LastResortHE-Regular.ttf"))


@pytest.mark.parametrize("missing", ["keywords", "layout", "transform", "all"])
def test_without_matplotlibs_private_names_the_public_path_gives_the_same(monkeypatch, missing):
    """A matplotlib without one of the private names label_text uses (FT2Font's keywords for
    fallbacks and kerning, its _layout, its _set_transform; here renamed to names it lacks) makes
    label_text take the public path -- font_manager.get_font, TextPath -- with the same boxes
    and outlines bit for bit as the references (RendererAgg.get_text_width_height_descent and
    TextPath, matplotlib's public API) and as the private path: no traceback, no other map."""
    import warnings

    from matplotlib.backends.backend_agg import RendererAgg
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextPath

    from compose.layers import labels_along

    size, font, weight = 6.5, "DejaVu Sans", "bold"
    face = label_text.face(font, weight)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")             # the glyphs DejaVu Sans lacks
        private = {t: (label_text._text_extent(t, size, face),
                       label_text.text_outline(t, size, font, weight)) for t in TEXTS}
        run = labels_along.glyph_run.__wrapped__("Río Verde", size, font, weight)

    monkeypatch.setattr(label_text, "_FONTS", {})   # font objects made afresh
    taken = []
    monkeypatch.setattr(label_text, "_public_font",
                        lambda f, real=label_text._public_font: taken.append("font") or real(f))
    monkeypatch.setattr(label_text, "_public_outline", lambda *a, real=label_text._public_outline:
                        taken.append("outline") or real(*a))
    if missing in ("keywords", "all"):
        monkeypatch.setattr(label_text, "_FONT_KEYWORDS",
                            {k: "_no_such" + v for k, v in label_text._FONT_KEYWORDS.items()})
    if missing in ("layout", "all"):
        monkeypatch.setattr(label_text, "_LAYOUT", "_no_such_layout")
    if missing in ("transform", "all"):
        monkeypatch.setattr(label_text, "_SET_TRANSFORM", "_no_such_set_transform")

    renderer = RendererAgg(1, 1, 72.0)
    prop = FontProperties(family=font, weight=weight, size=size)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for text in TEXTS:
            box = label_text._text_extent(text, size, face)
            v, codes = label_text.text_outline(text, size, font, weight)
            assert box == private[text][0], text
            assert v.tobytes() == private[text][1][0].tobytes(), text
            assert np.array_equal(codes, private[text][1][1]), text
            if "$" not in text:
                assert box == tuple(renderer.get_text_width_height_descent(text, prop, False))
            if text.strip():
                tp = TextPath((0.0, 0.0), text, size=size, prop=prop)
                assert v.tobytes() == np.asarray(tp.vertices, np.float64).tobytes(), text
        again = labels_along.glyph_run.__wrapped__("Río Verde", size, font, weight)
    assert np.array_equal(again.x, run.x) and np.array_equal(again.advance, run.advance)
    # the public path was taken for what is missing, and only then
    assert ("font" in taken) == (missing in ("keywords", "all"))
    assert ("outline" in taken) == (missing in ("layout", "all"))
