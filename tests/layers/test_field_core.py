"""Field and classes layers on a grid aligned with their source read only each window's core
(the margin is painted as no-data and never written out): the map and its statistics are the
same as when every window reads its padded region, with small windows (many seams) and wide
margins."""
from __future__ import annotations

import pickle

import numpy as np

from compose.engine import ArraySink, prepare, run
from compose.sources.raster import RasterSource
from compose.style import load_style
from tests.output._tiny import tiny_style


def _render(path, monkeypatch, core: bool):
    if not core:
        monkeypatch.setattr(RasterSource, "aligned_with", lambda self, canvas: False)
    prepared = prepare(load_style(path))
    try:
        readers = [la for la in prepared.layers if hasattr(la, "core_reads")]
        assert readers and all(la.core_reads is core for la in readers)
        sink = ArraySink(prepared.canvas)
        stats = run(prepared, [sink], window=16)
        return sink.image, stats
    finally:
        prepared.close()
        monkeypatch.undo()


def test_core_reads_give_the_same_map_and_statistics(tmp_path, monkeypatch):
    path = tiny_style(tmp_path)
    core_img, core_stats = _render(path, monkeypatch, core=True)
    pad_img, pad_stats = _render(path, monkeypatch, core=False)
    assert np.array_equal(core_img, pad_img)
    assert len(core_stats.layers) == len(pad_stats.layers)
    for la, lb in zip(core_stats.layers, pad_stats.layers):   # every count, bit for bit
        assert pickle.dumps(la) == pickle.dumps(lb), la.name
