"""The page outputs of a real render: PDF page size, extractable text, overlay paths landing
where the raster map has them, SVG text, the world file, furniture in the check report."""
from __future__ import annotations

import json
import re
import shutil
import subprocess
import textwrap

import numpy as np
import pytest
import rasterio

from compose.render import render_style
from compose.style import load_style
from tests.output._tiny import tiny_style

needs_poppler = pytest.mark.skipif(shutil.which("pdftoppm") is None or shutil.which("pdfinfo")
                                   is None, reason="poppler-utils not installed")

PAGE = """
[page]
paper       = "A5"
orientation = "landscape"
margin      = 8
scale       = 25000
title       = "Tiny page title"
subtitle    = "A test of the page"
credits     = "Data: generated in the test"
grid        = { step = 500 }
"""
DPI = 150


def _style(tmp_path, page=PAGE, overlays=True):
    path = tiny_style(tmp_path, extra=False, overlays=overlays)
    path.write_text(path.read_text().replace("dpi        = 150", f"dpi        = {DPI}")
                    + textwrap.dedent(page))
    return load_style(path)


@pytest.fixture(scope="module")
def rendered(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("page")
    style = _style(tmp)
    result = render_style(style, tmp / "out", html=False)
    return style, result


@needs_poppler
def test_pdf_page_is_the_requested_paper(rendered):
    _, result = rendered
    info = subprocess.run(["pdfinfo", str(result.outputs["pdf"])], capture_output=True,
                          text=True, check=True).stdout
    w, h = (float(v) for v in re.search(r"Page size:\s+([\d.]+) x ([\d.]+) pts", info).groups())
    # ISO 216 A5 is 148 x 210 mm; landscape; 1 pt = 25.4 / 72 mm
    assert w * 25.4 / 72 == pytest.approx(210.0, abs=0.05)
    assert h * 25.4 / 72 == pytest.approx(148.0, abs=0.05)


@needs_poppler
def test_pdf_text_is_extractable(rendered):
    _, result = rendered
    text = subprocess.run(["pdftotext", str(result.outputs["pdf"]), "-"], capture_output=True,
                          text=True, check=True).stdout
    for s in ("Tiny page title", "A test of the page", "Data: generated in the test",
              "not for navigation", "Alpha", "Beta", "1:25"):
        assert s in text, s


def test_svg_keeps_text_as_text(rendered):
    _, result = rendered
    svg = result.outputs["svg"].read_text()
    assert re.search(r"<text[^>]*>[^<]*Tiny page title", svg)
    assert 'width="595.' in svg          # A5 landscape, 210 mm in points


@pytest.mark.skipif(shutil.which("pdfimages") is None, reason="poppler-utils not installed")
def test_pdf_and_svg_embed_the_same_raster_the_right_way_up(rendered, tmp_path):
    """The PDF's image (extracted by poppler's pdfimages) and the SVG's (its data URI, decoded
    by Pillow) are the same pixels, and the PDF rasterised by poppler at the canvas dpi shows the
    map as the map PNG has it inside the frame (a map upside down would differ everywhere)."""
    import base64
    import io

    from matplotlib.image import imread
    from PIL import Image

    from compose.page.layout import style_canvas

    style, result = rendered
    subprocess.run(["pdfimages", "-png", str(result.outputs["pdf"]), str(tmp_path / "im")],
                   check=True)
    images = [np.asarray(Image.open(p).convert("RGB")) for p in sorted(tmp_path.glob("im-*.png"))]
    pdf_map = max(images, key=lambda a: a.size)
    svg = result.outputs["svg"].read_text()
    uris = re.findall(r'data:image/png;base64,\s*([A-Za-z0-9+/=\s]+)"', svg)
    svg_images = [np.asarray(Image.open(io.BytesIO(base64.b64decode(u))).convert("RGB"))
                  for u in uris]
    svg_map = max(svg_images, key=lambda a: a.size)
    assert pdf_map.shape == (result.height, result.width, 3)
    assert np.array_equal(pdf_map, svg_map)
    subprocess.run(["pdftoppm", "-r", str(DPI), "-png", "-singlefile",
                    str(result.outputs["pdf"]), str(tmp_path / "ras")], check=True)
    page = imread(tmp_path / "ras.png")[..., :3].astype(float) * 255
    png = imread(result.outputs["png"])[..., :3].astype(float) * 255
    _, (fx, fy, _, _) = style_canvas(style)
    r0, c0 = int(round(fy / 25.4 * DPI)), int(round(fx / 25.4 * DPI))
    crop = page[r0:r0 + result.height, c0:c0 + result.width]
    inner = (slice(3, -3), slice(3, -3))          # the neat line sits on the frame's edge
    diff = np.abs(crop[inner] - png[inner]).mean(axis=2)
    # overlays are drawn by two rasterisers (Agg, poppler): most pixels agree to a few levels
    assert np.median(diff) < 3
    flipped = np.abs(crop[inner][::-1] - png[inner]).mean(axis=2)
    assert np.percentile(diff, 90) < 3 and np.percentile(flipped, 90) > 6   # a gentle map


def test_canvas_follows_the_print_scale(rendered):
    _, result = rendered
    # 1920 m at 1:25 000 is 76.8 mm, at 150 dpi 454 pixels of 25000 * 0.0254 / 150 m
    assert result.width == round(76.8 / 25.4 * DPI)
    with rasterio.open(result.outputs["tif"]) as ds:
        assert ds.transform.a == pytest.approx(25000 * 0.0254 / DPI)


def test_world_file_matches_the_geotiff(rendered):
    _, result = rendered
    a, d, b, e, c, f = (float(v) for v in result.outputs["world"].read_text().split())
    with rasterio.open(result.outputs["tif"]) as ds:
        t = ds.transform
    # world file: pixel sizes, rotation terms, centre of the upper-left pixel
    assert (a, d, b, e) == pytest.approx((t.a, t.d, t.b, t.e))
    assert (c, f) == pytest.approx((t.c + t.a / 2, t.f + t.e / 2))


@needs_poppler
def test_pdf_overlay_paths_land_where_the_raster_has_them(tmp_path):
    """Rasterise the PDF at the canvas dpi and compare the dark overlay ink inside the map frame
    with the map PNG (a plain white map with the coast line, town markers and labels)."""
    style = _style(tmp_path, PAGE.replace('grid        = { step = 500 }', ''))
    # drop the raster layers so only overlays make ink
    path = style.path
    text = path.read_text()
    for name in ("relief", "land-growth", "water-growth"):
        text = text.replace(f'name   = "{name}"', f'name   = "{name}"\nenabled = false')
    path.write_text(text)
    style = load_style(path)
    result = render_style(style, tmp_path / "out", html=False, check=False)
    # 4x the canvas dpi, averaged back over 4 x 4 blocks: poppler snaps thin strokes to whole
    # pixels at low resolutions, which would compare poppler's rounding rather than geometry
    k = 4
    subprocess.run(["pdftoppm", "-r", str(DPI * k), "-png", "-singlefile",
                    str(result.outputs["pdf"]), str(tmp_path / "ras")], check=True)
    from matplotlib.image import imread
    page = imread(tmp_path / "ras.png")[..., :3].astype(float) * 255
    png = imread(result.outputs["png"])[..., :3].astype(float) * 255
    from compose.page.layout import style_canvas
    canvas, (fx, fy, fw, fh) = style_canvas(style)
    h, w = png.shape[:2]
    r0, c0 = int(round(fy / 25.4 * DPI * k)), int(round(fx / 25.4 * DPI * k))
    crop = page[r0:r0 + h * k, c0:c0 + w * k].reshape(h, k, w, k, 3).mean(axis=(1, 3))
    inner = (slice(3, -3), slice(3, -3))          # the neat line sits on the frame's edge
    gray_pdf, gray_png = crop.mean(axis=2)[inner], png.mean(axis=2)[inner]
    ink_pdf, ink_png = gray_pdf < 160, gray_png < 160
    iou = np.sum(ink_pdf & ink_png) / np.sum(ink_pdf | ink_png)
    assert ink_png.sum() > 200
    assert iou > 0.85
    # and the grey levels agree closely where either has ink (antialiasing differs slightly)
    either = ink_pdf | ink_png
    assert np.median(np.abs(gray_pdf[either] - gray_png[either])) < 25


def test_furniture_is_judged_as_overlay(rendered):
    _, result = rendered
    report = json.loads(result.outputs["check"].read_text())
    page_rules = [r for r in report["rules"] if (r["layer"] or "").startswith("page ")]
    names = {r["layer"] for r in page_rules}
    assert {"page title", "page scale bar", "page neat line", "page legend"} <= names
    assert {r["rule"] for r in page_rules} == {"label-contrast", "overlay-contrast"}
    assert all(r["passed"] for r in page_rules)


def test_pale_ink_fails_the_furniture_contrast(tmp_path):
    style = _style(tmp_path, PAGE + 'ink = "#c8c8c8"\n')
    result = render_style(style, tmp_path / "out", html=False)
    bad = [r for r in result.report.rules if r.layer == "page title"]
    assert bad and not bad[0].passed and "page.ink" in bad[0].fix


def test_corner_furniture_keeps_labels_clear(tmp_path):
    """A legend in the top-left corner of the frame: the label there moves or drops out."""
    from compose.engine import prepare
    from compose.page.layout import blocked_pixels
    from compose.page.write import blocked_for, legend_for_page, page_layout

    page = PAGE.replace("scale       = 25000", "scale       = 12500").replace(
        'paper       = "A5"', 'paper       = "A4"') + 'legend = "top left"\nnorth = "top right"\n'
    style = _style(tmp_path, page)
    run_ = prepare(style, keep_clear=blocked_for)     # what render does
    try:
        legend = legend_for_page(style, run_.ramps, run_.layers)
        layout = page_layout(style, (legend.width * 25.4, legend.height * 25.4))
        boxes = blocked_pixels(layout)
        labels = next(la for la in run_.layers if la.spec.kind == "labels")
        assert boxes
        for lab in labels.placement.placed:
            for b in boxes:
                c0, r0, c1, r1 = lab.box
                assert not (c0 < b[2] and b[0] < c1 and r0 < b[3] and b[1] < r1)
    finally:
        run_.close()


RIVER = """
[[layer]]
name   = "brook"
role   = "overlay"
kind   = "lines"
source = "vectors.gpkg"
table  = "brook"
stroke = "#1f4f7a"
width  = 0.8

[[layer]]
name   = "brook name"
role   = "overlay"
kind   = "labels"
source = "vectors.gpkg"
table  = "brook"
text   = "name"
along  = true
size   = 8
color  = "#1f3f6a"
"""


@needs_poppler
def test_curved_names_land_in_the_pdf_where_the_raster_has_them(tmp_path):
    """A name set glyph by glyph along a bending brook: pdftotext finds it, and the PDF's
    glyph ink lands on the raster map's glyph ink."""
    from tests.output._tiny import NORTH, PIXEL, WEST
    from tests.sources._files import write_vector

    style = _style(tmp_path, PAGE.replace('grid        = { step = 500 }', ''))
    path = style.path
    text = path.read_text()
    for name in ("relief", "land-growth", "water-growth"):
        text = text.replace(f'name   = "{name}"', f'name   = "{name}"\nenabled = false')
    path.write_text(text + textwrap.dedent(RIVER))
    t = np.radians(np.linspace(160, 20, 120))       # an arch across the map
    cx, cy, r = WEST + 32 * PIXEL, NORTH - 52 * PIXEL, 26 * PIXEL
    write_vector(tmp_path / "vectors.gpkg",
                 [({"type": "LineString", "coordinates": list(zip(cx + r * np.cos(t),
                                                                  cy + r * np.sin(t)))},
                   {"name": "Windingbrook"})],
                 crs="EPSG:32631", properties={"name": "str"}, table="brook")
    style = load_style(path)
    result = render_style(style, tmp_path / "out", html=False, check=False)
    assert "Windingbrook" in subprocess.run(["pdftotext", str(result.outputs["pdf"]), "-"],
                                            capture_output=True, text=True, check=True).stdout
    svg = result.outputs["svg"].read_text()
    assert "Windingbrook" in svg
    k = 4
    subprocess.run(["pdftoppm", "-r", str(DPI * k), "-png", "-singlefile",
                    str(result.outputs["pdf"]), str(tmp_path / "ras")], check=True)
    from matplotlib.image import imread

    from compose.page.layout import style_canvas
    page = imread(tmp_path / "ras.png")[..., :3].astype(float) * 255
    png = imread(result.outputs["png"])[..., :3].astype(float) * 255
    _, (fx, fy, _fw, _fh) = style_canvas(style)
    h, w = png.shape[:2]
    r0, c0 = int(round(fy / 25.4 * DPI * k)), int(round(fx / 25.4 * DPI * k))
    crop = page[r0:r0 + h * k, c0:c0 + w * k].reshape(h, k, w, k, 3).mean(axis=(1, 3))
    # the label's blue ink: blue clearly above red in both
    blue_pdf = (crop[..., 2] - crop[..., 0] > 40)[3:-3, 3:-3]
    blue_png = (png[..., 2] - png[..., 0] > 40)[3:-3, 3:-3]
    assert blue_png.sum() > 100
    assert np.sum(blue_pdf & blue_png) / np.sum(blue_pdf | blue_png) > 0.75


@needs_poppler
@pytest.mark.parametrize("fonts,kind", [("outlines", "Type 3"), ("truetype", "TrueType")])
def test_pdf_fonts_embedded_as_asked_and_text_extractable(tmp_path, fonts, kind):
    style = _style(tmp_path, PAGE + f'pdf_fonts = "{fonts}"\n')
    result = render_style(style, tmp_path / "out", html=False, check=False)
    listing = subprocess.run(["pdffonts", str(result.outputs["pdf"])], capture_output=True,
                             text=True, check=True).stdout
    rows = listing.splitlines()[2:]
    assert rows and all(kind in row for row in rows)
    text = subprocess.run(["pdftotext", str(result.outputs["pdf"]), "-"], capture_output=True,
                          text=True, check=True).stdout
    assert "Tiny page title" in text and "not for navigation" in text


def test_a_coarse_canvas_still_gets_a_readable_page_png(tmp_path):
    """A canvas of a few pixels per inch (a huge map.pixel): the page PNG is drawn at 72 dpi
    with the map enlarged into its frame, instead of failing on sub-pixel type."""
    path = tiny_style(tmp_path, extra=False)
    path.write_text(path.read_text().replace("pixel      = 30", "pixel      = 480")
                    + textwrap.dedent(PAGE.replace("scale       = 25000\n", "")))
    result = render_style(load_style(path), tmp_path / "out", html=False, check=False)
    from PIL import Image
    with Image.open(result.outputs["page"]) as im:
        w, h = im.size
    assert abs(w - 210 / 25.4 * 72) <= 1 and abs(h - 148 / 25.4 * 72) <= 1   # A5 landscape


def test_setter_listings_left_empty_only_while_loading():
    """compose.page.write.without_setter_listings: an Artist subclass created in the block still
    has matplotlib's working ``set`` (Artist.set sets each named property, matplotlib's API
    documentation), only its docstring and signature lack the property list; outside the block
    matplotlib's own listing is back and lists the properties."""
    import inspect

    import matplotlib.artist
    from matplotlib.lines import Line2D

    from compose.page.write import without_setter_listings

    listing = matplotlib.artist.kwdoc
    signing = matplotlib.artist.Artist.__dict__["_update_set_signature_and_docstring"]
    with without_setter_listings():
        class Inside(Line2D):
            pass

        class Deeper(Inside):
            pass
    assert matplotlib.artist.kwdoc is listing
    assert matplotlib.artist.Artist.__dict__["_update_set_signature_and_docstring"] is signing

    class Outside(Line2D):
        pass
    for cls in (Inside, Deeper):
        line = cls([0, 1], [0, 1])
        line.set(linewidth=3.0, color="red")
        assert line.get_linewidth() == 3.0 and line.get_color() == "red"
        assert "solid_capstyle" not in (cls.set.__doc__ or "")
        assert "linewidth" not in inspect.signature(cls.set).parameters
    assert "solid_capstyle" in Outside.set.__doc__
    assert "linewidth" in inspect.signature(Outside.set).parameters


def test_the_font_subsetter_and_the_dvi_reader_load_on_first_use():
    """matplotlib's text paths, as the render loads them for its page process
    (compose.layers.label_layer.load_text_modules), no longer load TeX's DVI reader with
    themselves, nor its PDF writer fontTools' subsetter (compose.lazy.on_first_use); both still
    work when used (the standard library's importlib.util.LazyLoader)."""
    code = textwrap.dedent("""
        import sys
        from compose.layers.label_layer import load_text_modules
        load_text_modules()
        from matplotlib.font_manager import FontProperties
        from matplotlib.textpath import TextPath
        assert len(TextPath((0, 0), "Harbour", size=12.0, prop=FontProperties()).vertices) > 0
        dvi = sys.modules["matplotlib.dviread"]
        assert type(dvi).__name__ == "_LazyModule", "loaded with the text paths"
        from compose.lazy import on_first_use
        on_first_use("fontTools.subset")
        import matplotlib.backends.backend_pdf
        assert "fontTools.varLib" not in sys.modules, "loaded with the PDF writer"
        from fontTools import subset
        options = subset.Options(glyph_names=True)
        assert options.glyph_names and "fontTools.varLib" in sys.modules
        assert callable(dvi.Dvi) and type(dvi).__name__ == "module"
    """)
    import sys
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr


def test_a_pdf_reads_its_images_pixels_only_after_the_call_before_images():
    """compose.page.write._before_images: ``fn`` runs once as matplotlib's PDF writer comes to
    its images (after the page's content and fonts), so map pixels changed by ``fn`` are the
    ones the file holds (the map drawn as the page process draws it, from its shared RGBA
    without a copy: map_rows_stored_top_first): the same file as one written from the changed
    pixels. A PDF written by another thread in the block does not call it."""
    import io
    import threading

    from matplotlib.figure import Figure

    from compose.page.draw import MAP_AXES
    from compose.page.write import _before_images, map_rows_stored_top_first

    def pdf(rgba):
        fig = Figure(figsize=(2, 2))
        ax = fig.add_axes((0, 0, 1, 1), label=MAP_AXES)
        ax.imshow(rgba[..., :3], interpolation="none")
        fig.text(0.1, 0.1, "Harbour")
        buf = io.BytesIO()
        with map_rows_stored_top_first(fig, rgba[..., :3], rgba):
            fig.savefig(buf, format="pdf", metadata={"CreationDate": None})
        return buf.getvalue()

    def image():
        rgba = np.zeros((8, 8, 4), np.uint8)
        rgba[..., 3] = 255
        return rgba

    pixels = image()
    calls = []

    def fn():
        calls.append(1)
        pixels[:4, :, :3] = (200, 40, 40)

    other = []
    with _before_images(fn):
        got = pdf(pixels)
        thread = threading.Thread(target=lambda: other.append(pdf(image())))
        thread.start()
        thread.join()
    assert calls == [1]
    assert got == pdf(pixels) != pdf(image())       # the pixels as fn left them
    assert other == [pdf(image())] and calls == [1]


@pytest.mark.parametrize("bands", [[1500], [512, 1024, 1500], [7, 300, 301, 1499, 1500]])
def test_the_page_png_written_as_the_bands_come_is_the_page_png(tmp_path, bands):
    """compose.page.write.PagePngRows: the page PNG written while the map is walked (band by
    band, the last band's rows by a process forked at the end) is the file write_png writes of
    paste_map's pixels, whatever the bands."""
    import os

    from compose.output.png import write_png
    from compose.page.process import Forked
    from compose.page.write import MIN_PAGE_DPI, PagePngRows, paste_map

    rng = np.random.default_rng(7)
    dpi = 200.0
    layout = type("Layout", (), {"frame": (10.0, 12.0, 1500 / dpi * 25.4, 1500 / dpi * 25.4)})()
    top = np.zeros((1700, 1400, 4), np.uint8)       # the frame is cut by the page's right edge
    top[rng.random(top.shape[:2]) < 0.05] = (20, 30, 40, 255)
    top[::97, :, 3] = 128
    paper = (0.97, 0.96, 0.95, 1.0)
    image = np.zeros((1500, 1500, 3), np.uint8)
    want = tmp_path / "whole.png"
    final = rng.integers(0, 256, image.shape, np.uint8)
    write_png(want, paste_map(top, paper, layout, final, dpi), dpi=max(dpi, MIN_PAGE_DPI))
    got = tmp_path / "rows.png"
    rows = PagePngRows(got, (top, paper), layout, image, dpi)
    done = 0
    for b in bands:
        image[done:b] = final[done:b]               # rows not yet walked stay black
        rows.walked(b)
        done = b
    rows.ready_to_fork()
    assert Forked(rows.finish).result()["page.png"] >= 0
    assert got.read_bytes() == want.read_bytes()
    del rows                                         # (this process leaves the file alone)
    assert os.path.getsize(got) == os.path.getsize(want)


def test_a_page_png_of_a_coarse_canvas_is_written_after_the_walk(tmp_path):
    """A map smaller than its frame (enlarged to it after the walk, paste_map) is not written
    band by band."""
    from compose.page.write import PagePngRows

    layout = type("Layout", (), {"frame": (10.0, 12.0, 100.0, 100.0)})()
    top = np.zeros((1000, 1000, 4), np.uint8)
    with pytest.raises(ValueError):
        PagePngRows(tmp_path / "p.png", (top, (1, 1, 1, 1)), layout,
                    np.zeros((20, 20, 3), np.uint8), 200.0)


@pytest.mark.parametrize("kind", ["many colours", "few colours", "translucent"])
def test_the_pdf_embeds_the_map_from_the_png_filed_for_it(kind):
    """compose.page.write._pdf_map_from_png: the map drawn from its shared RGBA
    (map_rows_stored_top_first with ``rgba``) is embedded from the PNG filed for ``base``
    (compose.page.encode.remember with ``pixels=base``) without reading the pixels: a PNG of
    other pixels filed for it gives the PDF of those pixels, byte for byte the file matplotlib's
    own path writes of them (an opaque RGB image of more than 256 colours: ISO 32000-1 7.4.4.4,
    a Flate stream with PNG predictors). An image of 256 colours or fewer (stored indexed) or
    with an alpha below 255 (a soft mask) goes through matplotlib's own path: the PDF of its
    own pixels."""
    import io

    from matplotlib.figure import Figure

    from compose.page import encode
    from compose.page.draw import MAP_AXES
    from compose.page.write import map_rows_stored_top_first

    rng = np.random.default_rng(5)

    def image():
        rgba = np.full((48, 64, 4), 255, np.uint8)
        levels = 200 if kind == "few colours" else 256
        rgba[..., :3] = rng.integers(0, levels, (48, 64, 1)) * np.array([1, 1, 0]) + (0, 0, 9)
        rgba[..., 2] = rng.integers(0, 256, (48, 64)) if kind != "few colours" else 9
        if kind == "translucent":
            rgba[3, 5, 3] = 128
        return rgba

    def pdf(rgba, base=None):
        """The PDF of a page showing ``rgba``'s colours; with ``base`` (the very array filed),
        drawn from ``rgba`` as the page process draws it."""
        fig = Figure(figsize=(2, 2))
        ax = fig.add_axes((0, 0, 1, 1), label=MAP_AXES)
        shown = rgba[..., :3] if base is None else base
        ax.imshow(shown, interpolation="none")
        fig.text(0.1, 0.1, "Harbour")
        buf = io.BytesIO()
        with encode.fast_png(), map_rows_stored_top_first(fig, shown,
                                                          None if base is None else rgba):
            fig.savefig(buf, format="pdf", metadata={"CreationDate": None})
        return buf.getvalue()

    mine, other = image(), image()
    base = mine[..., :3]
    rows = encode.PngRows(other.shape[1], "RGB")
    rows.add(np.ascontiguousarray(other[..., :3]))
    encode.remember(*rows.finish(), pixels=base)        # another image's PNG filed for it
    got = pdf(mine, base)
    if kind == "many colours":
        assert got == pdf(other) != pdf(mine)
    elif kind == "few colours":
        assert got == pdf(mine) != pdf(other)
    else:       # drawn with its alpha (no PNG filed for this other view of the same pixels)
        assert got == pdf(mine, mine[..., :3]) != pdf(other)


def test_page_pdf_and_svg_are_the_same_bytes_from_one_render_to_the_next(tmp_path, monkeypatch):
    # reproducible builds: with SOURCE_DATE_EPOCH set (the reproducible-builds.org convention
    # matplotlib follows for its file dates) two renders of one style give the same PDF and
    # SVG; the SVG's clip and path ids come from a fixed salt, not a random one
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    style = _style(tmp_path)
    first = render_style(style, tmp_path / "a", html=False)
    second = render_style(style, tmp_path / "b", html=False)
    for key in ("pdf", "svg"):
        assert first.outputs[key].read_bytes() == second.outputs[key].read_bytes(), key


NARROW = """
[page]
paper       = "A5"
orientation = "portrait"
margin      = 8
title       = "A longer title for the productivity of the invented coastal province"
subtitle    = "Costs from $5 to $10 per unit"
credits     = "Data: generated in the test; $2 a sheet, $3 bound"
"""


@needs_poppler
def test_a_title_wider_than_the_page_is_set_smaller_and_dollars_are_printed(tmp_path):
    """A title wider than the paper at its 15 pt is set smaller until it fits inside the
    margins (it ran off the sheet, cut off); a "$" in the page's and the legend's words is a
    dollar (two of them made mathtext of the words between). Word boxes and text read by
    poppler's pdftotext, an outside reader of the PDF."""
    path = tiny_style(tmp_path, extra=False)
    path.write_text(path.read_text().replace(
        'ramp   = "land"\n', 'ramp   = "land"\nlegend = { units = "$ per $100" }\n', 1)
        + textwrap.dedent(NARROW))
    result = render_style(load_style(path), tmp_path / "out", html=False, check=False)
    pdf = str(result.outputs["pdf"])
    text = subprocess.run(["pdftotext", pdf, "-"], capture_output=True, text=True,
                          check=True).stdout
    for s in ("A longer title for the productivity of the invented coastal province",
              "Costs from $5 to $10 per unit", "$2 a sheet, $3 bound", "$ per $100"):
        assert s in text, s
    boxes = subprocess.run(["pdftotext", "-bbox", pdf, "-"], capture_output=True, text=True,
                           check=True).stdout
    page_w = float(re.search(r'<page width="([\d.]+)"', boxes).group(1))
    assert page_w * 25.4 / 72 == pytest.approx(148.0, abs=0.05)       # ISO 216 A5 portrait
    right = page_w - 8 / 25.4 * 72                                     # the 8 mm margin, in pt
    words = re.findall(r'xMin="([\d.]+)"[^>]*xMax="([\d.]+)"[^>]*>([^<]*)</word>', boxes)
    assert words and max(float(x1) for _, x1, _ in words) <= right
    last = next(float(x1) for _, x1, w in words if w == "province")
    assert last > right - 20          # set smaller to fit, not to a size far below it


def test_a_title_too_long_even_in_the_smallest_type_is_refused(tmp_path):
    """Past 9 pt a title no longer reads as one: the page refuses it, naming the key."""
    from compose.errors import StyleError
    from compose.page.layout import page_layout

    long = "A title " + "that goes on and on " * 12
    style = _style(tmp_path, NARROW.replace(
        'title       = "A longer title for the productivity of the invented coastal province"',
        f'title       = "{long}"'))
    with pytest.raises(StyleError, match=r"^page\.title: .* even at 9 pt"):
        page_layout(style)
