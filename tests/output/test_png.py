"""The streaming PNG writer against an independent decoder (Pillow, via matplotlib's dependency)."""
import numpy as np
import pytest
from PIL import Image

from compose.output.png import PngWriter, write_png


@pytest.mark.parametrize("channels", [1, 3, 4])
def test_png_round_trip_matches_pillow(tmp_path, channels):
    # Outside reference: Pillow's PNG decoder (ISO/IEC 15948 conformant) reads back what we wrote.
    rng = np.random.default_rng(1)
    shape = (37, 53) if channels == 1 else (37, 53, channels)
    img = rng.integers(0, 256, shape, dtype=np.uint8)
    path = tmp_path / "a.png"
    with PngWriter(path, 53, 37, channels, dpi=300) as w:
        for r0 in range(0, 37, 10):  # bands of uneven size, as the renderer sends them
            w.write_rows(img[r0:r0 + 10])
    with Image.open(path) as im:
        back = np.asarray(im)
        assert im.info.get("dpi") is not None and round(im.info["dpi"][0]) == 300
    np.testing.assert_array_equal(back, img)


def test_png_rejects_short_stream(tmp_path):
    w = PngWriter(tmp_path / "b.png", 4, 4, 3)
    w.write_rows(np.zeros((2, 4, 3), np.uint8))
    with pytest.raises(ValueError, match="2 rows"):
        w.close()


def test_write_png_whole(tmp_path):
    img = np.arange(2 * 600 * 3, dtype=np.uint32).reshape(2, 600, 3).astype(np.uint8)
    write_png(tmp_path / "c.png", img)
    with Image.open(tmp_path / "c.png") as im:
        np.testing.assert_array_equal(np.asarray(im), img)


def test_adler32_combine_matches_zlib():
    # Outside reference: the standard library's zlib.adler32 (RFC 1950) of the concatenation.
    import zlib

    from compose.output.png import adler32_combine

    rng = np.random.default_rng(3)
    for n1, n2 in [(0, 5), (7, 0), (100, 70000), (65521, 65522), (200000, 3)]:
        a = rng.integers(0, 256, n1, dtype=np.uint8).tobytes()
        b = rng.integers(0, 256, n2, dtype=np.uint8).tobytes()
        assert adler32_combine(zlib.adler32(a), zlib.adler32(b), len(b)) == zlib.adler32(a + b)


@pytest.mark.parametrize("threads", [1, 3])
def test_png_threads_same_bytes_and_pillow_reads_them(tmp_path, threads):
    # The file does not depend on how many threads deflate it.
    rng = np.random.default_rng(4)
    img = (rng.integers(0, 4, (300, 211, 3)) * 60).astype(np.uint8)
    paths = []
    for t in (1, threads):
        path = tmp_path / f"t{t}.png"
        with PngWriter(path, 211, 300, 3, threads=t) as w:
            for r0 in range(0, 300, 16):
                w.write_rows(img[r0:r0 + 16])
        paths.append(path)
    assert paths[0].read_bytes() == paths[1].read_bytes()
    with Image.open(paths[1]) as im:
        np.testing.assert_array_equal(np.asarray(im), img)


def test_png_abort_closes_file(tmp_path):
    w = PngWriter(tmp_path / "d.png", 8, 8, 3, threads=2)
    w.write_rows(np.zeros((4, 8, 3), np.uint8))
    w.abort()
    w.abort()
    assert w._f.closed


def test_png_bytes_do_not_depend_on_the_bands(tmp_path):
    # The deflate pieces are PIECE_ROWS rows whatever bands the rows come in (a render's bands
    # are its window rows): the same file for every band height; Pillow reads it back.
    from compose.output.png import PIECE_ROWS

    rng = np.random.default_rng(5)
    height = 2 * PIECE_ROWS + 61
    img = rng.integers(0, 256, (height, 40, 3), dtype=np.uint8)
    img[:, :20] = 7                     # compressible, so pieces differ in size
    files = []
    for band in (PIECE_ROWS, 2 * PIECE_ROWS, 96, 37, height):
        path = tmp_path / f"b{band}.png"
        with PngWriter(path, 40, height, 3, threads=2) as w:
            for r0 in range(0, height, band):
                w.write_rows(img[r0:r0 + band])
        files.append(path.read_bytes())
    assert all(f == files[0] for f in files[1:])
    with Image.open(tmp_path / f"b{PIECE_ROWS}.png") as im:
        np.testing.assert_array_equal(np.asarray(im), img)


def test_png_pieces_on_reused_thread_buffers_same_bytes(tmp_path):
    # Each deflating thread filters its pieces into one array of its own, reused piece after
    # piece (the last piece shorter): the file equals a one-thread write (no buffer shared)
    # and Pillow reads the image back; ``sync`` changes nothing in the file.
    from compose.output.png import PIECE_ROWS

    rng = np.random.default_rng(6)
    height = 5 * PIECE_ROWS + 17
    img = rng.integers(0, 256, (height, 33, 3), dtype=np.uint8)
    img[::3] = 9                        # pieces compress to different sizes
    files = []
    for threads, sync in ((1, False), (2, True), (3, False)):
        path = tmp_path / f"p{threads}.png"
        with PngWriter(path, 33, height, 3, threads=threads, sync=sync) as w:
            for r0 in range(0, height, 100):
                w.write_rows(img[r0:r0 + 100])
        files.append(path.read_bytes())
    assert files[1] == files[0] and files[2] == files[0]
    with Image.open(tmp_path / "p2.png") as im:
        np.testing.assert_array_equal(np.asarray(im), img)


def test_png_written_past_the_page_cache_same_bytes(tmp_path, monkeypatch):
    # Large images go to the disk from the writer's own buffer (O_DIRECT where the file system
    # allows; compose.output.atomic.DirectFile): the same file as through the page cache, and
    # Pillow reads it back. The threshold is lowered so a small image takes that path.
    import compose.output.png as png

    rng = np.random.default_rng(7)
    img = rng.integers(0, 256, (700, 300, 3), dtype=np.uint8)
    img[:, :150] = 3
    files = []
    for threshold in (1 << 40, 0):
        monkeypatch.setattr(png, "DIRECT_BYTES", threshold)
        path = tmp_path / f"d{threshold}.png"
        with PngWriter(path, 300, 700, 3, threads=2, sync=True) as w:
            for r0 in range(0, 700, 128):
                w.write_rows(img[r0:r0 + 128])
        assert w._f.closed
        files.append(path.read_bytes())
    assert files[1] == files[0]
    with Image.open(tmp_path / "d0.png") as im:
        np.testing.assert_array_equal(np.asarray(im), img)
