"""The page written by a forked process (compose.page.process): the same files as in this
process, errors handed back as they were raised, no child left behind."""
from __future__ import annotations

import os
import re

import numpy as np
import pytest

import compose.page.process as process
from compose.errors import StyleError
from compose.render import render_style
from tests.page.test_write import _style

pytestmark = pytest.mark.skipif(not hasattr(os, "fork"), reason="no fork on this system")


def _render(tmp_path, name, forked, monkeypatch):
    monkeypatch.setattr(process, "can_fork", lambda: forked)
    style = _style(tmp_path / name)
    return render_style(style, tmp_path / name / "out", html=False)


def _pdf_without_date(path):
    return re.sub(rb"/CreationDate \(.*?\)", b"", path.read_bytes())


def test_forked_page_is_the_page_written_in_process(tmp_path, monkeypatch):
    here = _render(tmp_path, "here", False, monkeypatch)
    there = _render(tmp_path, "there", True, monkeypatch)
    assert there.outputs["page"].read_bytes() == here.outputs["page"].read_bytes()
    assert _pdf_without_date(there.outputs["pdf"]) == _pdf_without_date(here.outputs["pdf"])
    # the SVG drawn during the walk with a stand-in for the map's PNG data, put in afterwards,
    # is the SVG drawn here after the walk (ids and date aside: the SVG writer salts its ids)
    svg = [re.sub(r'id="[^"]*"|url\(#[^)]*\)|xlink:href="#[^"]*"|<dc:date>[^<]*', "",
                  out.outputs["svg"].read_text()) for out in (here, there)]
    assert svg[0] == svg[1]
    assert "page svg drawn early" in there.seconds and "page svg drawn early" not in here.seconds
    # (the page PNG, written by a process forked as the walk ended, is the one written here)
    # the furniture's contrast results (judged with the layout the child sent) are the same
    rules = [(r.rule, r.layer, r.value) for r in here.report.rules]
    assert [(r.rule, r.layer, r.value) for r in there.report.rules] == rules
    assert any(layer.startswith("page ") for _, layer, _ in rules)
    assert {"page pdf", "page svg", "page page.png"} <= set(there.seconds)
    # the legend PNG drawn by the page process is the one drawn here
    assert there.outputs["legend"].read_bytes() == here.outputs["legend"].read_bytes()


@pytest.mark.parametrize("guess", ["wrong", "wrong first band", "failing"])
def test_a_page_drawn_early_on_a_wrong_guess_is_drawn_again(tmp_path, monkeypatch, guess):
    """The page process draws the legend and furniture during the walk from the no-data layers
    guessed from the sources when the render was prepared (compose.page.nodata), or without
    such a guess from those of the windows walked so far (compose.page.write.page_early); when
    the walk ends with another set, or that work failed, the page is drawn after the walk: the
    same files."""
    import importlib

    import compose.page.nodata as nodata
    import compose.page.write as write

    render = importlib.import_module("compose.render")      # (compose.render is also a function)
    right = _render(tmp_path, "right", True, monkeypatch)
    if guess == "wrong":
        monkeypatch.setattr(nodata, "nodata_guess",
                            lambda layers, canvas: frozenset({"a layer that is not there"}))
    elif guess == "wrong first band":
        monkeypatch.setattr(nodata, "nodata_guess", lambda layers, canvas: None)

        def noting(mapper, sink):
            inner = mapper or map

            def wrong(task, windows):
                for res in inner(task, windows):
                    sink.nodata = {"a layer that is not there"}
                    yield res
            return wrong
        monkeypatch.setattr(render, "_noting_nodata", noting)
    else:
        def fails(*args, **kwargs):
            raise RuntimeError("no early page")
        monkeypatch.setattr(write, "page_early", fails)
    again = _render(tmp_path, guess, True, monkeypatch)
    for kind in ("page", "legend"):
        assert again.outputs[kind].read_bytes() == right.outputs[kind].read_bytes(), kind
    assert _pdf_without_date(again.outputs["pdf"]) == _pdf_without_date(right.outputs["pdf"])
    svg = [re.sub(r'id="[^"]*"|url\(#[^)]*\)|xlink:href="#[^"]*"|<dc:date>[^<]*', "",
                  out.outputs["svg"].read_text()) for out in (right, again)]
    assert svg[0] == svg[1]


def test_a_page_forked_before_the_render_was_prepared_is_the_same_page(tmp_path, monkeypatch):
    """render_style forks the page process before preparing and hands the prepared render
    over (compose.page.handover); when it cannot be pickled, the page is forked after it."""
    from compose.page import handover

    here = _render(tmp_path, "here", False, monkeypatch)
    attached = []
    attach = process.PageJob.attach
    monkeypatch.setattr(process.PageJob, "attach",
                        lambda self, run_: attached.append(self._prepared is None)
                        or attach(self, run_))
    early = _render(tmp_path, "early", True, monkeypatch)
    assert attached == [True]
    # a layer that cannot be pickled: the early process is ended, a late one writes the page
    monkeypatch.setattr(handover, "pack", lambda obj, shared: (_ for _ in ()).throw(TypeError))
    late = _render(tmp_path, "late", True, monkeypatch)
    for other in (early, late):
        for kind in ("page", "legend", "png"):
            assert other.outputs[kind].read_bytes() == here.outputs[kind].read_bytes(), kind
        assert _pdf_without_date(other.outputs["pdf"]) == _pdf_without_date(here.outputs["pdf"])


def test_shared_image_is_seen_by_a_forked_process():
    image = process.shared_image(4, 5)
    assert image.shape == (4, 5, 3) and image.dtype == np.uint8 and not image.any()
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:                                    # the child writes, the parent reads
        image[2, 3] = (7, 8, 9)
        os.write(w, b"x")
        os._exit(0)
    os.read(r, 1)
    os.waitpid(pid, 0)
    os.close(r)
    os.close(w)
    assert tuple(image[2, 3]) == (7, 8, 9)


class _Prepared:
    ramps: dict = {}
    layers: list = []


def _job(monkeypatch, fake_write):
    return process.PageJob(None, _Prepared(), None, {}, fake_write, forked=True)


def test_a_style_error_in_the_child_is_raised_in_the_parent(monkeypatch):
    def fake_write(style, run_, sink, tmp, nodata, on_layout=None, **kw):
        raise StyleError("page.legend: the legend needs shrinking to 20% to fit the panel")

    job = _job(monkeypatch, fake_write)
    assert job.forked
    job.start({"land"})
    with pytest.raises(StyleError, match="needs shrinking to 20%"):
        job.layout()
    job.abort()
    assert job.pid is None


def test_layout_first_then_seconds(monkeypatch):
    def fake_write(style, run_, sink, tmp, nodata, on_layout=None, **kw):
        on_layout({"nodata": sorted(nodata)})
        kw["with_png"]()                    # what draws the page PNG sends the legend
        return {"pdf": 0.5}, None

    job = process.PageJob(None, _Prepared(), None, {}, fake_write, forked=True,
                          legend=lambda run_, nodata: b"legend of "
                          + ",".join(sorted(nodata)).encode())
    job.start({"b", "a"})
    assert job.layout() == {"nodata": ["a", "b"]}
    assert job.legend() == b"legend of a,b"
    seconds = job.wait()
    assert seconds["pdf"] == 0.5 and seconds["waited"] >= 0
    assert job.pid is None                           # reaped


def test_a_child_that_dies_is_an_error_not_a_hang(monkeypatch):
    def fake_write(style, run_, sink, tmp, nodata, on_layout=None, **kw):
        os._exit(3)

    job = _job(monkeypatch, fake_write)
    job.start(set())
    with pytest.raises(RuntimeError, match="ended without writing the page"):
        job.layout()


def test_abort_before_start_ends_the_child(monkeypatch):
    def fake_write(style, run_, sink, tmp, nodata, on_layout=None, **kw):  # pragma: no cover
        raise AssertionError("never called")

    job = _job(monkeypatch, fake_write)
    pid = job.pid
    job.abort()
    assert job.pid is None
    with pytest.raises(ChildProcessError):          # reaped: no zombie left
        os.waitpid(pid, os.WNOHANG)


def test_forked_returns_its_value_or_raises_its_error():
    assert process.Forked(lambda: {"pdf": 0.25}).result() == {"pdf": 0.25}

    def fails():
        raise StyleError("page.legend: too big")

    with pytest.raises(StyleError, match="too big"):
        process.Forked(fails).result()


def test_forked_page_png_is_the_page_png_drawn_here(tmp_path, monkeypatch):
    """write_page(fork=True) draws the page PNG in a forked process from the same figure."""
    from compose.engine import prepare, run
    from compose.page.write import PageSink, blocked_for, vector_split, write_page

    style = _style(tmp_path)
    prepared = prepare(style, keep_clear=blocked_for)
    try:
        sink = PageSink(prepared.canvas, vector_split(prepared.layers))
        stats = run(prepared, [sink])
        nodata = {s.name for s in stats.layers if s.nodata_weight > 0}
        files = {}
        for fork in (False, True):
            tmp = {k: tmp_path / f"{fork}.{k}" for k in ("pdf", "svg", "page")}
            seconds, _ = write_page(style, prepared, sink, tmp, nodata, fork=fork)
            assert seconds["page.png"] > 0
            files[fork] = tmp["page"].read_bytes()
    finally:
        prepared.close()
    assert files[True] == files[False]


def test_a_figure_started_during_the_walk_finishes_as_the_same_page(tmp_path):
    """page_ahead builds the frame and its vectors before the legend is known; write_page
    finishes it with the legend and the raster into the same PDF, SVG and page PNG."""
    from compose.engine import prepare, run
    from compose.page.draw import finishes
    from compose.page.write import PageSink, _layout, blocked_for, fit_legend, page_ahead, vector_split, write_page

    style = _style(tmp_path)
    prepared = prepare(style, keep_clear=blocked_for)
    try:
        sink = PageSink(prepared.canvas, vector_split(prepared.layers))
        started = page_ahead(style, prepared, sink)
        stats = run(prepared, [sink])
        nodata = {s.name for s in stats.layers if s.nodata_weight > 0}
        assert finishes(started, _layout(style, fit_legend(style, prepared.ramps,
                                                           prepared.layers, nodata)))
        files = {}
        for name, ahead in (("built", None), ("started", started)):
            tmp = {k: tmp_path / f"{name}.{k}" for k in ("pdf", "svg", "page")}
            write_page(style, prepared, sink, tmp, nodata, ahead=ahead)
            files[name] = (_pdf_without_date(tmp["pdf"]), tmp["page"].read_bytes(),
                           re.sub(rb"<dc:date>.*?</dc:date>|[a-z_]{1,6}[0-9a-f]{10}\b", b"",
                                  tmp["svg"].read_bytes()))
    finally:
        prepared.close()
    assert files["started"] == files["built"]


def test_the_review_page_with_its_ramps_made_by_the_page_process_is_the_same(tmp_path,
                                                                               monkeypatch):
    """The page process makes the review page's ramps section while the map is walked
    (PageJob's ``html``); the review page is the one made in a single process (the line
    quoting the render's own seconds aside; the plots' clip paths are numbered, so two
    renders write the same text)."""
    made = []
    real = process.PageJob.html

    def html(self):
        got = real(self)
        made.append(got)
        return got

    monkeypatch.setattr(process.PageJob, "html", html)
    pages = []
    for name, forked in (("here", False), ("there", True)):
        monkeypatch.setattr(process, "can_fork", lambda forked=forked: forked)
        style = _style(tmp_path / name)
        out = render_style(style, tmp_path / name / "out")
        pages.append(re.sub(r"<dt>render</dt><dd>[^<]*</dd>", "", re.sub(
            re.escape(str(tmp_path / name)), "", out.outputs["html"].read_text())))
    assert made[0] is None and made[1] and 'id="ramps"' not in made[1]
    assert made[1] in pages[1] and "data:image/svg" in made[1]
    assert pages[0] == pages[1]


_INHERITED = """
import sys
import compose.page.process as process
from compose.render import render_style
from compose.style import load_style
from compose.style.overrides import parse_override

child = process._child


def noting(inbox, outbox, parent, job):
    with open(sys.argv[2], "w") as f:      # before the child loads anything of its own
        f.write(" ".join(m for m in ("matplotlib", "matplotlib.textpath") if m in sys.modules))
    child(inbox, outbox, parent, job)


process._child = noting
style = load_style(sys.argv[1], overrides=tuple(parse_override(s) for s in sys.argv[4:]))
render_style(style, sys.argv[3], html=False)
"""


@pytest.mark.parametrize("labelled,remembered", [(True, False), (True, True), (False, False)])
def test_the_page_process_inherits_the_text_modules_of_a_labelled_style(tmp_path, labelled,
                                                                        remembered):
    """A style with a labels layer whose font is not remembered loads matplotlib's text modules
    while it is prepared (compose.layers.label_text asks matplotlib); the render loads them
    before it forks the page process, whose writers need them too, so the child starts with
    them (a fresh interpreter: this one has matplotlib already). Once the font is remembered
    (the user's cache folder) the labels are measured without matplotlib and the render leaves
    it to the child, as for a style without labels."""
    import os
    import subprocess
    import sys

    from compose.demo import styles_dir

    coast = styles_dir() / "coast.toml"
    sets = [] if labelled else [f"layer.{name}.enabled=false" for name in ("town names",
                                                                          "river names")]
    env = dict(os.environ, COMPOSE_CACHE=str(tmp_path / "cache") if remembered else "off")
    if remembered:
        subprocess.run([sys.executable, "-c", "from compose.layers.label_text import face; "
                        "face('DejaVu Sans', 'normal')"], env=env, check=True)
    seen = tmp_path / "seen.txt"
    subprocess.run([sys.executable, "-c", _INHERITED, str(coast), str(seen), str(tmp_path / "out"),
                    *sets], check=True, capture_output=True, env=env)
    assert seen.read_text().split() == (["matplotlib", "matplotlib.textpath"]
                                        if labelled and not remembered else [])
    assert (tmp_path / "out" / "coast.pdf").is_file()
