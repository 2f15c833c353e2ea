"""A draft's raster reads started early on their own threads (compose.layers.early) give the
same pixels as the reads made when the window is painted."""
from __future__ import annotations

from pathlib import Path

import numpy as np

from compose.check.draft import draft_canvas
from compose.engine import prepare, render_window
from compose.style import load_style

STYLES = Path(__file__).resolve().parents[2] / "styles"



def _full_and_draft_agree(style_path):
    """(full, draft) reports of one style, asserting they give every rule the same verdict."""
    from compose.api import check

    full = check(style_path, cache=False)
    draft = check(style_path, draft=True, cache=False)
    verdicts = [{(r.rule, r.layer, r.ramp): (r.passed, r.met) for r in rep.rules}
                for rep in (full, draft)]
    assert verdicts[0] == verdicts[1]
    return full, draft

def test_early_reads_give_the_same_draft():
    style = load_style(STYLES / "coast.toml")
    prepared = prepare(style, canvas=draft_canvas(style.canvas()), draft=True)
    try:
        early = [la for la in prepared.layers if getattr(la, "early", None) is not None]
        assert {la.spec.kind for la in early} == {"field", "relief"}
        (window,) = prepared.windows()
        first = render_window(prepared, window)
        for layer in early:
            assert layer.early.take(window) is not None        # the window lies inside
            layer.early = None                                 # read when painted instead
        again = render_window(prepared, window)
        assert np.array_equal(first.rgb8, again.rgb8)
    finally:
        prepared.close()


def test_an_early_read_error_is_raised_where_the_layer_paints(tmp_path):
    from compose.canvas import Canvas
    from compose.layers.early import EarlyRead

    canvas = Canvas.from_extent("EPSG:32631", (0, 0, 100, 100), 10)

    def fail(window):
        raise OSError("gone")

    read = EarlyRead(canvas, fail)
    read.wait()
    try:
        read.take(canvas.whole(1))
    except OSError as exc:
        assert str(exc) == "gone"
    else:
        raise AssertionError("the read's error was not raised")


def test_a_draft_relief_read_in_one_piece_or_by_rows_is_the_same(monkeypatch):
    import compose.layers.relief as relief

    style = load_style(STYLES / "coast.toml")
    shades = []
    for cells in (relief.DRAFT_READ_CELLS, 0):          # one read of the region; 3 rows at a time
        monkeypatch.setattr(relief, "DRAFT_READ_CELLS", cells)
        prepared = prepare(style, canvas=draft_canvas(style.canvas()), draft=True)
        try:
            layer = next(la for la in prepared.layers if la.spec.kind == "relief")
            (window,) = prepared.windows()
            shades.append(layer._draft_shade(window))
        finally:
            prepared.close()
    assert np.array_equal(shades[0], shades[1], equal_nan=True)


def test_sampled_cells_read_whole_blocks_evenly_and_keep_their_rows():
    """The draft's block sample (compose.layers.early.sampled_cells): every pixel takes a cell of
    a block read, in its own row of blocks, at the same place in the block as its own centre
    (at most one cell inside the block's edge, so a 3 x 3 neighbourhood stays in the block);
    1 in ``every`` blocks of each block row is read, and every block column gets its share.
    Properties of our own design (no outside source)."""
    from compose.layers.early import sampled_cells

    full, factor, block, every = (8192, 8192), 22, (512, 512), 8
    n = -(-8192 // factor)
    draft = np.arange(-2, n + 2)                        # padded past both edges
    rows, cols = sampled_cells(full, factor, draft, draft, block, (0, 0), every)
    inside = (draft >= 0) & (draft * factor + factor // 2 < 8192)
    assert (rows[~inside, :] == -1).all() and (cols[:, ~inside] == -1).all()
    ok = (rows >= 0) & (cols >= 0)
    assert ok[np.ix_(inside, inside)].all()
    r, c = rows[ok], cols[ok]
    assert ((r % 512 >= 1) & (r % 512 <= 510) & (c % 512 >= 1) & (c % 512 <= 510)).all()
    read = set(zip((r // 512).tolist(), (c // 512).tolist()))
    assert len(read) == 16 * 16 // every                # 2 of the 16 blocks of each block row
    assert sorted(np.bincount([j for _, j in read], minlength=16)) == [2] * 16
    # rows stay; columns move by whole blocks; pixels over a block read keep their own cell
    centre = draft * factor + factor // 2
    own_r = np.clip(centre, 1 + 512 * (centre // 512), 510 + 512 * (centre // 512))
    own_c = own_r
    for i in np.flatnonzero(inside):
        assert (rows[i, inside] == own_r[i]).all()
        shift = cols[i, inside] - own_c[inside]
        assert (shift % 512 == 0).all()
        kept = shift == 0
        assert {(int(own_r[i]) // 512, int(j)) for j in own_c[inside][kept] // 512} <= read
    # with every block read the cells are the pixels' own
    rows1, cols1 = sampled_cells(full, factor, draft, draft, block, (0, 0), 1)
    assert (cols1[np.ix_(inside, inside)] == own_c[inside][None, :]).all()


def test_sampled_cells_of_many_rows_are_those_of_each_row_alone():
    """sampled_cells maps each block row's columns once and gives its other rows the same: the
    cells of a whole window are those of each of its rows mapped alone, on a canvas offset from
    the file's blocks, with rows and columns past its edges."""
    from compose.layers.early import sampled_cells

    for full, factor, block, origin, every in (((8192, 8192), 22, (512, 512), (0, 0), 8),
                                               ((3000, 5000), 9, (256, 300), (17, 5), 5)):
        rows = np.arange(-3, full[0] // factor + 3)
        cols = np.arange(-3, full[1] // factor + 3)
        got = sampled_cells(full, factor, rows, cols, block, origin, every)
        alone = [sampled_cells(full, factor, rows[i:i + 1], cols, block, origin, every)
                 for i in range(len(rows))]
        for k in (0, 1):
            assert np.array_equal(got[k], np.vstack([a[k] for a in alone]))


def _big_style(tmp_path, n: int = 2048, tile: int = 128) -> Path:
    """A relief, a field and lines on an n x n canvas of 30 m cells, rasters in tiles of ``tile``
    cells without overviews (as bench/render.py's benchmark, smaller)."""
    import rasterio
    import shapely
    from affine import Affine

    rng = np.random.default_rng(7)
    yy, xx = np.mgrid[0:n, 0:n] / n
    dem = np.sin(xx * 9) * np.cos(yy * 7) * 300 + rng.normal(0, 40, (n, n)) + 800
    field = (np.cos(xx * 5 + yy * 3) + 1) * 6 * (0.8 + 0.4 * rng.random((n, n)))
    field[:n // 5, :n // 3] = np.nan
    profile = dict(driver="GTiff", width=n, height=n, count=1, dtype="float32", crs="EPSG:32630",
                   tiled=True, blockxsize=tile, blockysize=tile, compress="deflate",
                   transform=Affine(30, 0, 400000, 0, -30, 4600000))
    for name, data in (("dem", dem), ("field", field)):
        with rasterio.open(tmp_path / f"{name}.tif", "w", nodata=np.nan if name == "field"
                           else None, **profile) as ds:
            ds.write(data.astype("float32"), 1)
    walks = np.cumsum(rng.normal(0, 12 * 30, (300, 40, 2)), axis=1) + \
        rng.uniform([400000, 4600000 - 30 * n], [400000 + 30 * n, 4600000], (300, 1, 2))
    from pyogrio.raw import write

    geoms = shapely.to_wkb(shapely.linestrings(walks))
    write(tmp_path / "lines.gpkg", geoms, [], [], crs="EPSG:32630", geometry_type="LineString",
          driver="GPKG", layer="lines")
    style = tmp_path / "big.toml"
    style.write_text(
        '[map]\ncrs = "EPSG:32630"\n'
        f"extent = [400000, {4600000 - 30 * n}, {400000 + 30 * n}, 4600000]\npixel = 30\ndpi = 150\n"
        '[ramp.r]\nkind = "sequential"\ndomain = [0, 12]\n'
        'through = [{L = 92, C = 10, h = 95}, {L = 55, C = 40, h = 140}, {L = 25, C = 20, h = 160}]\n'
        '[[layer]]\nname = "relief"\nrole = "ground"\nkind = "relief"\nsource = "dem.tif"\n'
        '[[layer]]\nname = "field"\nrole = "theme"\nkind = "field"\nsource = "field.tif"\n'
        'ramp = "r"\nblend = "multiply"\n'
        '[[layer]]\nname = "lines"\nrole = "overlay"\nkind = "lines"\nsource = "lines.gpkg"\n'
        'stroke = "#3a3a3a"\nwidth = 0.48\n')
    return style


def test_a_draft_of_large_files_reads_a_sample_of_their_blocks_with_the_full_verdict(tmp_path):
    """Files of more than DECIMATE_BLOCKS blocks without overviews: the draft decodes about
    SAMPLE_BLOCKS of them (not every one, as a decimated read does) and judges every rule as
    the full check does (the draft's contract: compared with our own full check), with the
    relief's and the field's measures near the full check's."""
    from compose.layers.early import SAMPLE_BLOCKS, BlockSample

    style_path = _big_style(tmp_path)
    style = load_style(style_path)
    d = draft_canvas(style.canvas())
    prepared = prepare(style, canvas=d, draft=True)
    try:
        samples = [la.sample for la in prepared.layers if getattr(la, "sample", None) is not None]
        assert len(samples) == 2 and all(isinstance(s, BlockSample) for s in samples)
        (window,) = prepared.windows()
        for s in samples:
            rows, cols = s.cells(window)
            ok = (rows >= 0) & (cols >= 0)
            blocks = set(zip((rows[ok] // 128).tolist(), (cols[ok] // 128).tolist()))
            assert len(blocks) <= 1.25 * SAMPLE_BLOCKS < 256
    finally:
        prepared.close()
    full, draft = _full_and_draft_agree(style_path)
    for rule, layer, tol in (("ground-lightness", "relief", 1.5), ("relief-visible", "relief", 1.5),
                             ("theme-chroma", "field", 1.5), ("grayscale-order", "field", 0.03)):
        (f,), (g,) = full.rule(rule, layer), draft.rule(rule, layer)
        assert np.allclose(g.value, f.value, atol=tol), (rule, f.value, g.value)


def _read_each(sample, rows, cols):
    """The 3 x 3 neighbourhoods of (rows, cols) read cell by cell (BlockSample.read)."""
    h, w = rows.shape
    step = np.array([-1, 0, 1])
    valid = ((rows >= 0) & (cols >= 0))[:, None, :, None]
    r3 = np.where(valid, rows[:, None, :, None] + step[None, :, None, None], -1)
    c3 = np.where(valid, cols[:, None, :, None] + step[None, None, None, :], -1)
    shape = (h, 3, w, 3)
    return sample.read(np.broadcast_to(r3, shape).reshape(3 * h, 3 * w),
                       np.broadcast_to(c3, shape).reshape(3 * h, 3 * w))


def test_neighbourhoods_gathered_by_block_are_the_cells_read_one_by_one(tmp_path):
    """BlockSample.neighbourhoods groups centres by block and gathers whole 3 x 3 stencils; the
    values must be those of reading every cell on its own (BlockSample.read), NaN included: for
    the draft's own cells, and for centres at block edges, file edges, outside the canvas and
    the file (the cell-by-cell path), on a canvas offset from the file's grid."""
    from compose.canvas import Canvas
    from compose.layers.early import BlockSample
    from compose.sources.raster import RasterSource

    style = load_style(_big_style(tmp_path, n=1024, tile=64))
    full = style.canvas()
    # the full canvas shifted by (37, 11) cells into the file and reaching past its far edges
    shifted = Canvas.from_extent(full.crs, (full.bounds[0] + 11 * 30, full.bounds[1] - 40 * 30,
                                            full.bounds[2] + 40 * 30, full.bounds[3] - 37 * 30),
                                 30, dpi=full.dpi)
    rng = np.random.default_rng(3)
    for canvas in (full, shifted):
        draft = draft_canvas(canvas, 100)
        source = RasterSource(tmp_path / "dem.tif", layer="relief")
        try:
            sample = BlockSample.of(source, draft, canvas, round(draft.pixel / canvas.pixel), 8)
            assert sample is not None
            rows, cols = sample.cells(draft.whole(3))
            got = sample.neighbourhoods(rows, cols)
            assert np.array_equal(got, _read_each(sample, rows, cols), equal_nan=True)
            assert np.isfinite(got).mean() > 0.8          # the padding lies outside
            # any cells: block and file edges, -1, past the canvas
            n = canvas.height + 2
            rows = rng.integers(-1, n, (40, 50))
            cols = rng.integers(-1, n, (40, 50))
            rows[:5] = np.array([0, 63, 64, n - 3, n - 2])[:, None]
            cols[:, :4] = [[0, 63, 64, n - 2]]
            got = sample.neighbourhoods(rows, cols)
            assert np.array_equal(got, _read_each(sample, rows, cols), equal_nan=True)
            # BlockSample.read cuts whole rows out of blocks: the cells RasterSource.cells_at
            # reads one by one, for the draft's cells, these and a mix of both
            orow, ocol = sample.offset
            draft_rows, draft_cols = sample.cells(draft.whole(3))
            mixed_rows = np.vstack([draft_rows[:30, :50], rows])
            mixed_cols = np.vstack([draft_cols[:30, :50], cols])
            for r, c in ((draft_rows, draft_cols), (rows, cols), (mixed_rows, mixed_cols),
                         (rows[3], cols[3])):
                off = (r < 0) | (c < 0)
                want = source.cells_at(np.where(off, -1, r + orow), np.where(off, -1, c + ocol))
                assert np.array_equal(sample.read(r, c), want, equal_nan=True)
        finally:
            source.close()


def test_a_sample_decodes_its_blocks_under_a_small_gdal_cache(tmp_path):
    """BlockSample reads its blocks with GDAL's block cache bounded to SAMPLE_CACHE_BLOCKS of
    them (at least SAMPLE_CACHE_BYTES), the bound lifted afterwards; the values are the cells
    RasterSource.cells_at reads under the default cache."""
    from rasterio.env import get_gdal_config

    from compose.layers.early import SAMPLE_CACHE_BLOCKS, SAMPLE_CACHE_BYTES, BlockSample
    from compose.sources.raster import RasterSource

    style = load_style(_big_style(tmp_path, n=1024, tile=256))
    full = style.canvas()
    draft = draft_canvas(full, 100)
    seen = []

    class Watched(BlockSample):
        def source_block(self, *args):
            seen.append(get_gdal_config("GDAL_CACHEMAX"))
            return super().source_block(*args)

    before = get_gdal_config("GDAL_CACHEMAX")
    source = RasterSource(tmp_path / "dem.tif", layer="relief")
    try:
        sample = Watched(source, draft, full, round(draft.pixel / full.pixel), 4)
        rows, cols = sample.cells(draft.whole(3))
        got = sample.read(rows, cols)
        hood = sample.neighbourhoods(rows, cols)
        assert get_gdal_config("GDAL_CACHEMAX") == before > SAMPLE_CACHE_BYTES
        bound = max(SAMPLE_CACHE_BYTES, SAMPLE_CACHE_BLOCKS * 256 * 256 * 8)
        assert len(seen) > 4 and set(seen) == {bound}
        off = (rows < 0) | (cols < 0)
        orow, ocol = sample.offset
        want = source.cells_at(np.where(off, -1, rows + orow), np.where(off, -1, cols + ocol))
        assert np.array_equal(got, want, equal_nan=True)
        assert np.array_equal(hood, _read_each(sample, rows, cols), equal_nan=True)
    finally:
        source.close()


def test_a_sampled_draft_measures_its_relief_stretch_on_its_own_cells(tmp_path, monkeypatch):
    """A draft reading a sample of blocks takes the relief's "auto" stretch from the cells it
    shades (compose.layers.relief.ReliefLayer._sampled_stretch) and decodes no block outside
    its sample (the full check's 9 stretch windows straddle other blocks). On gentle terrain,
    stretched about 14 x, three times rougher in the east than in the west, its factor is within
    10 % of the full check's and within 3 % of the factor measured on every cell of the canvas:
    the estimate of the same 95th percentile from another, evenly spread sample (the full
    check's 9 windows of 128 x 128 cells sit at three phases of the hills and read 4-8 % low
    here; bound: common practice for a draft, no source)."""
    import rasterio
    from affine import Affine

    from compose.layers.hillshade import stretch_factor
    from compose.sources.raster import RasterSource

    n, tile = 2048, 128
    rng = np.random.default_rng(0)
    yy, xx = np.mgrid[0:n, 0:n] / n
    dem = ((np.sin(xx * 23 + 1) * np.cos(yy * 17) * 6 + rng.normal(0, 0.6, (n, n)))
           * (1.0 + 2.0 * xx) + 200).astype("float32")
    with rasterio.open(tmp_path / "dem.tif", "w", driver="GTiff", width=n, height=n, count=1,
                       dtype="float32", crs="EPSG:32630", tiled=True, blockxsize=tile,
                       blockysize=tile, compress="deflate",
                       transform=Affine(30, 0, 400000, 0, -30, 4600000)) as ds:
        ds.write(dem, 1)
    (tmp_path / "gentle.toml").write_text(
        '[map]\ncrs = "EPSG:32630"\n'
        f"extent = [400000, {4600000 - 30 * n}, {400000 + 30 * n}, 4600000]\npixel = 30\n"
        '[[layer]]\nname = "relief"\nrole = "ground"\nkind = "relief"\nsource = "dem.tif"\n')
    style = load_style(tmp_path / "gentle.toml")
    prepared = prepare(style)
    full = prepared.layers[0].stretch
    prepared.close()

    reads: list[tuple[int, int, int, int]] = []
    cells_into = RasterSource._cells_into

    def record(self, win, dest):
        reads.append((int(win.row_off), int(win.col_off), int(win.height), int(win.width)))
        cells_into(self, win, dest)

    from compose.layers.early_tiff import PlainSource

    block = PlainSource._block

    def record_plain(self, index, row, col, rows=None):    # the same blocks read without GDAL
        bh, bw = self.block_shape
        reads.append((row, col, bh, bw))
        return block(self, index, row, col, rows)

    monkeypatch.setattr(RasterSource, "_cells_into", record)
    monkeypatch.setattr(PlainSource, "_block", record_plain)
    prepared = prepare(style, canvas=draft_canvas(style.canvas()), draft=True)
    try:
        layer = prepared.layers[0]
        assert layer.sample is not None
        layer.early.wait()
        draft = layer.stretch
        rows, cols = layer.sample.cells(prepared.canvas.whole(0))
    finally:
        prepared.close()
    ok = (rows >= 0) & (cols >= 0)
    sampled = set(zip((rows[ok] // tile * tile).tolist(), (cols[ok] // tile * tile).tolist()))
    assert reads and all(h == w == tile and (r, c) in sampled for r, c, h, w in reads), reads
    assert len(reads) == len(set(reads)) == len(sampled) < (n // tile) ** 2 // 4
    every_cell = stretch_factor([(dem, 30.0, 30.0)])
    assert 5 < full < every_cell                # stretched; the 9 windows read low here
    assert abs(draft / full - 1) <= 0.10, (draft, full)
    assert abs(draft / every_cell - 1) <= 0.03, (draft, every_cell)


def test_early_reads_run_one_after_another_on_one_thread_that_ends_when_idle():
    """A draft's early reads (relief, field, ...) share one reading thread, in the order they
    were made, which ends once no read is left (a full check forks its helpers only while no
    other thread runs, see compose.api._Helpers)."""
    import threading
    import time

    from compose.canvas import Canvas
    from compose.layers.early import EarlyRead

    canvas = Canvas.from_extent("EPSG:32630", (0, 0, 3000, 3000), 30)
    seen: list[tuple[int, int]] = []

    def read(k):
        def run(window):
            seen.append((k, threading.get_ident()))
            time.sleep(0.01)
            return np.full(window.padded[2:], k, np.float32)
        return run

    reads = [EarlyRead(canvas, read(k)) for k in range(3)]
    window = canvas.whole(2)
    assert [float(r.take(window)[0, 0]) for r in reads] == [0.0, 1.0, 2.0]
    assert [k for k, _ in seen] == [0, 1, 2] and len({t for _, t in seen}) == 1
    for _ in range(200):
        if not any(t.name == "draft-read" for t in threading.enumerate()):
            break
        time.sleep(0.01)
    assert not any(t.name == "draft-read" for t in threading.enumerate())


def test_early_reads_read_through_the_layers_own_handles(tmp_path):
    """A draft's early reads run on the reading thread through the handle the layer opened its
    source with (RasterSource.lent): no handle of that thread's own (each first handle of a
    thread also sets up GDAL's and PROJ's state for it), the same pixels as reads made when the
    window is painted; a thread reading a lent source's cells meanwhile (here the opening one)
    reads them through a handle of its own, the same values."""
    import threading

    from compose.sources.raster import RasterSource

    style = load_style(_big_style(tmp_path, n=1024, tile=64))
    for draft in (True, False):
        canvas = draft_canvas(style.canvas()) if draft else style.canvas()
        prepared = prepare(style, canvas=canvas, draft=draft)
        try:
            rasters = [la for la in prepared.layers if la.spec.kind in ("relief", "field")]
            assert len(rasters) == 2
            for layer in rasters:
                if layer.early is not None:
                    layer.early.wait()
                assert layer.source._others == []          # no handle of another thread
                assert layer.source._owner == threading.get_ident()
            if draft:
                (window,) = prepared.windows()
                first = render_window(prepared, window)
                for layer in rasters:
                    layer.early = None                     # read when painted instead
                assert np.array_equal(first.rgb8, render_window(prepared, window).rgb8)
        finally:
            prepared.close()
    source = RasterSource(tmp_path / "dem.tif", layer="relief")
    try:
        want = source.block_cells(64, 128, 64, 64)
        got: list = []

        def other():
            with source.lent():
                got.append(source.block_cells(64, 128, 64, 64))
                here = threading.Thread(target=lambda: got.append(source.block_cells(
                    64, 128, 64, 64)))
                here.start()
                here.join()

        reader = threading.Thread(target=other)
        reader.start()
        reader.join()
        assert len(got) == 2 and all(np.array_equal(g, want, equal_nan=True) for g in got)
        assert len(source._others) == 1                    # the third thread's own handle
        assert np.array_equal(source.block_cells(64, 128, 64, 64), want, equal_nan=True)
    finally:
        source.close()


def _regional(folder: Path, n: int, seed: int) -> None:
    """Rewrite _big_style's rasters as a map that changes by region: a theme rising from west to
    east with a block of high values in the south-east, terrain with one steep mountain in the
    north-west and noise growing to the south."""
    import rasterio

    rng = np.random.default_rng(seed)
    yy, xx = np.mgrid[0:n, 0:n] / n
    field = 2 + 3 * xx + rng.normal(0, 0.5, (n, n))
    field[(xx > 0.6) & (yy > 0.55)] += 6
    dem = 800 + 500 * np.exp(-((xx - 0.2) ** 2 + (yy - 0.3) ** 2) / 0.01) \
        + rng.normal(0, 10 + 40 * yy, (n, n))
    for name, data in (("field", field), ("dem", dem)):
        with rasterio.open(folder / f"{name}.tif", "r+") as ds:
            ds.write(data.astype("float32"), 1)


def test_a_sampled_draft_of_a_map_changing_by_region_stays_near_the_full_check(tmp_path):
    """The error a draft's block sample (SAMPLE_BLOCKS of a file's blocks) may make, stated in
    compose.check.draft: on a map whose theme and terrain change by region (256 blocks, 16 read)
    every verdict is the full check's and the measures lie within a little more than the largest
    differences found on six maps (compose.check.draft: ground L* 0.37, relief spread 0.12 L*,
    theme chroma 1.44, grey order 0.033, relief shift 0.05, overlay contrast share 0.027; this
    map is the worst of them for several; a bound of our own measuring, no source)."""
    from compose.layers.early import SAMPLE_BLOCKS

    style_path = _big_style(tmp_path)
    _regional(tmp_path, 2048, 4)
    style = load_style(style_path)
    prepared = prepare(style, canvas=draft_canvas(style.canvas()), draft=True)
    try:
        (window,) = prepared.windows()
        rows, cols = prepared.layers[0].sample.cells(window)
        ok = (rows >= 0) & (cols >= 0)
        assert len(set(zip((rows[ok] // 128).tolist(), (cols[ok] // 128).tolist()))) \
            <= 1.25 * SAMPLE_BLOCKS
    finally:
        prepared.close()
    full, draft = _full_and_draft_agree(style_path)
    for rule, layer, tol in (("ground-lightness", "relief", 0.5), ("relief-visible", "relief", 0.2),
                             ("theme-chroma", "field", 1.5), ("grayscale-order", "field", 0.04),
                             ("relief-shift", "field", 0.06), ("overlay-contrast", "lines", 0.03)):
        (f,), (g,) = full.rule(rule, layer), draft.rule(rule, layer)
        assert np.allclose(g.value, f.value, atol=tol, rtol=0), (rule, f.value, g.value)


def test_distinct_is_numpys_unique():
    # numpy's own np.unique is the reference; distinct only avoids its first-use import of
    # numpy.ma (a draft's start: about 6 ms on its reading thread)
    from compose.layers.early import distinct

    rng = np.random.default_rng(7)
    for a in (np.array([], np.int64), np.array([5]), rng.integers(-3, 9, 40),
              rng.integers(0, 512, (7, 11)), np.arange(10)[::-1]):
        got = distinct(a)
        want = np.unique(a)
        assert got.dtype == want.dtype and np.array_equal(got, want)


def test_distinct_imports_no_numpy_ma_where_np_unique_does():
    # the draft's reading thread sorts block rows; numpy.ma is not needed for it
    import subprocess
    import sys

    def imports_ma(call: str) -> bool:
        code = (f"import sys, compose.layers.early as e, numpy as np; {call}; "
                "print('numpy.ma' in sys.modules)")
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                             check=True)
        return out.stdout.strip() == "True"

    assert not imports_ma("e.distinct(np.array([3, 1, 3]))")
    # the control: this numpy's np.unique does (else the test above proves nothing)
    assert imports_ma("np.unique(np.array([3, 1, 3]))") == ("is_masked" in __import__(
        "inspect").getsource(np.lib._arraysetops_impl._unique1d))
