"""compose.page.encode: the page writers' PNG files, whole or made band by band beforehand."""
from __future__ import annotations

import io
import pickle

import numpy as np
import pytest
from PIL import Image

from compose.page import encode, process


def _image(mode: str) -> np.ndarray:
    rng = np.random.default_rng(3)
    shape = {"L": (37, 23), "RGB": (37, 23, 3), "RGBA": (37, 23, 4)}[mode]
    smooth = np.cumsum(rng.integers(0, 3, shape), axis=0)           # some structure to deflate
    return (smooth % 256).astype(np.uint8)


@pytest.mark.parametrize("mode", ["L", "RGB", "RGBA"])
def test_png_rows_made_band_by_band_are_png_bytes_of_the_whole(mode):
    image = _image(mode)
    rows = encode.PngRows(image.shape[1], mode)
    for r0 in (0, 1, 16, 30):                       # bands of 1, 15, 14 and 7 rows
        rows.add(image[r0:{0: 1, 1: 16, 16: 30, 30: 37}[r0]])
    key, data = rows.finish()
    assert data == encode.png_bytes(image)
    # a valid PNG of the same pixels (Pillow reads it back)
    assert np.array_equal(np.asarray(Image.open(io.BytesIO(data))), image)
    assert key[:2] == (mode, image.shape)


def test_png_rows_across_deflate_blocks_are_png_bytes_of_the_whole():
    """Bands that cut the image anywhere against encode.BLOCK give the file of the whole image
    (its rows reach the deflate stream in the same blocks), and Pillow reads the pixels back."""
    rng = np.random.default_rng(5)
    image = (np.cumsum(rng.integers(0, 3, (2 * encode.BLOCK + 77, 19, 3)), axis=0) % 256
             ).astype(np.uint8)
    whole = encode.png_bytes(image)
    for cuts in ([1, encode.BLOCK - 1, 2, encode.BLOCK + 3], [encode.BLOCK, encode.BLOCK], [300]):
        rows = encode.PngRows(image.shape[1], "RGB")
        r0 = 0
        for n in cuts + [image.shape[0] - sum(cuts)]:
            rows.add(image[r0:r0 + n])
            r0 += n
        assert rows.finish()[1] == whole
    assert np.array_equal(np.asarray(Image.open(io.BytesIO(whole))), image)


def test_a_remembered_png_is_what_a_save_writes():
    image = _image("RGB")
    rows = encode.PngRows(image.shape[1], "RGB")
    rows.add(image)
    key, data = rows.finish()
    marked = data + b"remembered"                   # tell it from a fresh encode
    encode.remember(key, marked)
    try:
        with encode.fast_png():
            buf = io.BytesIO()
            Image.fromarray(image).save(buf, format="png")
        assert buf.getvalue() == marked
        with encode.fast_png():                     # other pixels: encoded as usual
            buf = io.BytesIO()
            Image.fromarray(image[::-1].copy()).save(buf, format="png")
        assert buf.getvalue() == encode.png_bytes(image[::-1])
    finally:
        encode._known.pop(key, None)


def _walk_messages():
    """An RGB page image, a sink holding it, and the parent's messages of a walk in two bands
    (no-data layers {"land"}, then {"land", "sea"}; the walk ends with {"sea"}), as pickled."""
    base = _image("RGB")
    sink = type("Sink", (), {"base": base})()
    messages = io.BytesIO()
    for m in (("rows", (10, {"land"})), ("rows", (30, {"land", "sea"})), ("walked", {"sea"})):
        pickle.dump(m, messages)
    messages.seek(0)
    return base, sink, messages


def test_the_page_process_encodes_its_raster_while_the_walk_runs():
    """The child's wait for the walk (process._walked) encodes the rows the parent reports
    finished, as the PDF and SVG writers embed them (RGB, top row first), and returns the
    no-data layers with what the early page work made."""
    base, sink, messages = _walk_messages()
    known = dict(encode._known)
    guesses = []

    def early(guess, rest):
        guesses.append(guess)
        return "early", rest()          # the rest of the walk waited for from inside

    try:
        # the early work runs once, after the first band, with the no-data layers so far
        assert process._walked(messages, sink, early) == ({"sea"}, ("early", {"sea"}))
        assert guesses == [{"land"}]
        new = {k: v for k, v in encode._known.items() if k not in known}
        assert list(new.values()) == [encode.png_bytes(base)]
    finally:
        encode._known.clear()
        encode._known.update(known)


def test_with_a_guess_from_the_sources_the_early_page_work_runs_before_the_first_band():
    """Given the no-data layers guessed when the render was prepared (compose.page.nodata), the
    child runs the early page work at once, before reading the walk's first band, with that
    guess; the rows are still encoded and the final set returned."""
    base, sink, messages = _walk_messages()
    known = dict(encode._known)
    calls = []

    def early(guess, rest):
        calls.append((guess, messages.tell()))
        return "early", rest()

    try:
        got = process._walked(messages, sink, early, frozenset({"sea"}))
        assert got == ({"sea"}, ("early", {"sea"}))
        assert calls == [({"sea"}, 0)]              # once, nothing read yet
        new = {k: v for k, v in encode._known.items() if k not in known}
        assert list(new.values()) == [encode.png_bytes(base)]
    finally:
        encode._known.clear()
        encode._known.update(known)


def test_an_opaque_rgba_save_is_stored_as_rgb():
    """Alpha 255 everywhere: the file holds the RGB pixels (Pillow reads them back), the same
    file as a save of the RGB image; any other alpha stays RGBA."""
    rgb = _image("RGB")
    rgba = np.dstack([rgb, np.full(rgb.shape[:2], 255, np.uint8)])
    with encode.fast_png():
        saved = {}
        for name, image in (("rgb", rgb), ("rgba", rgba)):
            buf = io.BytesIO()
            Image.fromarray(image).save(buf, format="png")
            saved[name] = buf.getvalue()
        rgba[0, 0, 3] = 254
        buf = io.BytesIO()
        Image.fromarray(rgba).save(buf, format="png")
        translucent = buf.getvalue()
    assert saved["rgba"] == saved["rgb"] == encode.png_bytes(rgb)
    back = Image.open(io.BytesIO(saved["rgba"]))
    assert back.mode == "RGB" and np.array_equal(np.asarray(back), rgb)
    back = Image.open(io.BytesIO(translucent))
    assert back.mode == "RGBA" and np.array_equal(np.asarray(back), rgba)


def test_a_png_filed_with_its_array_is_found_by_that_array_alone():
    """compose.page.encode.known_png / png_of: a PNG remembered with ``pixels`` is given back
    for that very array object without reading it (a marked file proves it was not encoded
    again); a copy or another view of the same pixels is looked up by its hash or encoded,
    and idat() gives the image data matplotlib's PDF writer embeds (PNG section 11.2.4)."""
    image = _image("RGB")
    rows = encode.PngRows(image.shape[1], "RGB")
    rows.add(image)
    key, data = rows.finish()
    other = image[::-1].copy()
    other_key = ("RGB", other.shape, b"x")
    marked = data + b"filed"
    try:
        encode.remember(other_key, marked, pixels=other)
        assert encode.known_png(other) is marked and encode.png_of(other) is marked
        assert encode.known_png(other[:]) is None
        assert encode.png_of(other[:]) == encode.png_bytes(other)
        encode.remember(key, data)
        assert encode.known_png(image) is None and encode.png_of(image.copy()) == data
    finally:
        encode._known.pop(key, None)
        encode._known.pop(other_key, None)
        encode._held[:] = [(a, d) for a, d in encode._held if a is not other]
    import zlib

    raw = zlib.decompress(encode.idat(data))            # filtered rows: a type byte each
    assert len(raw) == image.shape[0] * (image.shape[1] * 3 + 1)


def test_a_deferred_save_is_filled_with_the_png_afterwards():
    """compose.page.encode.deferred: the save of an unfinished image of the deferred size writes
    the placeholder; filled() puts the finished image's PNG data in its place as base64 (the
    data: URI form of RFC 2397 the SVG writer uses), and refuses text without exactly one."""
    import base64

    image = _image("RGB")
    other = _image("L")
    with encode.fast_png(), encode.deferred(image.shape[1], image.shape[0]):
        buf, small = io.BytesIO(), io.BytesIO()
        Image.fromarray(np.zeros_like(image)).save(buf, format="png")
        Image.fromarray(other[:5]).save(small, format="png")      # another size: encoded
    assert buf.getvalue() == encode.PLACEHOLDER
    assert np.array_equal(np.asarray(Image.open(small)), other[:5])
    text = b'<image xlink:href="data:image/png;base64,\n' + base64.b64encode(buf.getvalue()) + b'"/>'
    png = encode.png_of(image)
    done = encode.filled(text, png)
    uri = done.split(b"base64,\n")[1].split(b'"')[0]
    assert np.array_equal(np.asarray(Image.open(io.BytesIO(base64.b64decode(uri)))), image)
    assert encode.filled(done, png) is None and encode.filled(text + text, png) is None
