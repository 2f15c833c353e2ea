"""The compiled loops (compose/_kernels.c) give the numpy paths' numbers bit for bit.

The C source is compiled here with setuptools into a temporary folder (so the test checks the
source as it is, whether or not the installed package holds a build of it), then everything is
computed both ways: an overlay part's beneath histograms on random composites (coverage in
8-bit steps, whose sums are exact in any order, and arbitrary float32 coverage, whose sums are
not), the grey order at its thresholds, whole renders of the tiny test region with themes
drawn opaque, half transparent and under a second theme, in windows of two sizes, the 8-bit
conversion of a window and the hillshade. The numpy paths are the reference:
tests/test_measure.py checks the statistics against the direct formulas (WCAG 2 contrast
ratio, CIE L*, np.bincount) pixel by pixel, tests/layers/test_hillshade.py the shade against
Horn (1981).
"""
from __future__ import annotations

import dataclasses
import importlib.util
import shutil
from pathlib import Path

import numpy as np
import pytest

from compose import kernels
from compose import measure as M
from compose.check.stats import LayerStats, PartStats
from compose.layers.base import Paint

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def compiled(tmp_path_factory):
    """compose/_kernels.c built by setuptools (the flags of setup.py) and loaded."""
    pytest.importorskip("setuptools")
    if shutil.which("gcc") is None and shutil.which("cc") is None:
        pytest.skip("no C compiler")
    from setuptools import Distribution, Extension
    from setuptools.command.build_ext import build_ext

    out = tmp_path_factory.mktemp("kernels")
    ext = Extension("compose._kernels", [str(ROOT / "compose" / "_kernels.c")],
                    extra_compile_args=["-O3", "-ffp-contract=off", "-fno-trapping-math",
                                               "-fno-math-errno"])
    dist = Distribution({"name": "kernels-test", "ext_modules": [ext]})
    cmd = build_ext(dist)
    cmd.build_lib = str(out / "lib")
    cmd.build_temp = str(out / "tmp")
    cmd.ensure_finalized()
    cmd.run()
    path = Path(cmd.get_ext_fullpath("compose._kernels"))
    spec = importlib.util.spec_from_file_location("compose._kernels", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture
def use(compiled, monkeypatch):
    """use(True): the measure runs the compiled loops; use(False): the numpy path."""
    monkeypatch.setattr(kernels, "_loaded", [compiled])

    def switch(on: bool) -> None:
        monkeypatch.setattr(kernels, "enabled", on)
    return switch


def _composite(rng, h, w, smooth: bool) -> np.ndarray:
    """A padded composite (3, h, w) float32 in [0, 1]: smooth shading or scattered colours,
    with a few values just outside [0, 1] and on the 8-bit rounding edges."""
    if smooth:
        y, x = np.mgrid[0:h, 0:w] / max(h, w)
        base = 0.5 + 0.45 * np.sin(7 * x[None] + np.arange(3)[:, None, None]) * np.cos(5 * y[None])
        out = base.astype(np.float32)
    else:
        out = rng.random((3, h, w), dtype=np.float32)
    out.reshape(-1)[:50] = np.float32(1.0000001)
    out.reshape(-1)[50:100] = np.float32(-1e-7)
    out.reshape(-1)[100:200] = (np.arange(100, dtype=np.float32) + np.float32(0.5)) / np.float32(255)
    return out


def _parts_equal(a: PartStats, b: PartStats) -> None:
    for f in dataclasses.fields(a):
        x, y = getattr(a, f.name), getattr(b, f.name)
        if isinstance(x, np.ndarray) or isinstance(y, np.ndarray):
            assert x is not None and y is not None, f.name
            assert x.dtype == y.dtype and x.shape == y.shape, f.name
            assert x.tobytes() == y.tobytes(), f.name
        else:
            assert x == y, f.name


@pytest.mark.parametrize("coverage", ["8-bit", "float", "faint", "none"])
@pytest.mark.parametrize("smooth", [True, False])
@pytest.mark.parametrize("two_parts", [False, True])
def test_overlay_part_equals_the_numpy_path_bit_for_bit(use, coverage, smooth, two_parts):
    rng = np.random.default_rng(11)
    h, w, pad = 70, 90, 3
    drawn = rng.random((h, w)) < 0.3
    if coverage == "8-bit":         # Agg's antialiased coverage: sums exact in any order
        alpha = rng.integers(1, 256, (h, w)).astype(np.float32) / np.float32(255)
    elif coverage == "float":       # arbitrary float32 values: sums that round
        alpha = rng.random((h, w), dtype=np.float32) * np.float32(0.7) + np.float32(1e-3)
    elif coverage == "faint":       # 1/255 steps beside 1e-6: not exact in any order
        alpha = np.where(rng.random((h, w)) < 0.5, np.float32(1e-6), np.float32(1)).astype(np.float32)
    else:
        drawn[:] = False
        alpha = np.ones((h, w), np.float32)
    alpha = np.where(drawn, alpha, np.float32(0)).astype(np.float32)
    beneath = _composite(rng, h, w, smooth)
    ground = _composite(np.random.default_rng(3), h, w, not smooth) if two_parts else None
    inner = (slice(pad, h - pad), slice(pad, w - pad))
    paint = Paint("stroke", alpha, color=(0.2, 0.25, 0.3))
    results = []
    for on in (True, False):
        use(on)
        layer = LayerStats(name="lines", role="overlay", kind="lines")
        M._measure_part(layer, paint, alpha, beneath.copy(), ground, True, inner)
        results.append(layer.parts["stroke"])
    _parts_equal(*results)
    if coverage == "none":
        assert results[0].contrast is None
    else:
        assert results[0].contrast is not None and results[0].contrast.sum() > 0


@pytest.mark.parametrize("blend", ["normal", "multiply"])
@pytest.mark.parametrize("coverage", ["8-bit", "float", "opaque", "none"])
@pytest.mark.parametrize("second", [False, True])
def test_overlay_composited_and_measured_in_one_pass_equals_the_numpy_path(use, blend, coverage,
                                                                          second):
    # WindowMeasure.paint_over: a flat colour composited by the compiled kernel while it
    # gathers what lies beneath; against the numpy path's measure first, then composite_over.
    # The composite and every histogram bit for bit (a second part: its ground contrast
    # against the layer's ground, kept before the first part was composited)
    from types import SimpleNamespace

    from compose.check.stats import Statistics
    from compose.composite import composite_over

    rng = np.random.default_rng(17)
    h, w, pad = 64, 80, 3
    drawn = rng.random((h, w)) < 0.35
    if coverage == "8-bit":
        alpha = rng.integers(1, 256, (h, w)).astype(np.float32) / np.float32(255)
    elif coverage == "float":
        alpha = rng.random((h, w), dtype=np.float32) * np.float32(0.9) + np.float32(1e-3)
    else:
        alpha = np.ones((h, w), np.float32)
    if coverage != "opaque":
        alpha = np.where(drawn & (coverage != "none"), alpha, np.float32(0)).astype(np.float32)
    ground = _composite(rng, h, w, smooth=False)
    layer = SimpleNamespace(spec=SimpleNamespace(name="lines", role="overlay", kind="lines",
                                                 blend=blend))
    paints = [Paint("halo", alpha, color=(0.9, 0.85, 0.8)), Paint("stroke", alpha[::-1].copy(),
                                                                  color=(0.2, 0.25, 0.3))]
    paints = paints if second else paints[:1]
    template = Statistics(width=w - 2 * pad, height=h - 2 * pad, background=(1.0, 1.0, 1.0),
                          layers=[LayerStats(name="lines", role="overlay", kind="lines")])
    results = []
    for fused in (True, False):
        use(fused)
        window = SimpleNamespace(row=0, col=0, inner=(slice(pad, h - pad), slice(pad, w - pad)))
        meter = M.WindowMeasure(template, window)
        out = ground.copy()
        meter.begin_layer(0, layer, len(paints), out)
        for pi, paint in enumerate(paints):
            planes = paint.planes()
            if fused:
                assert meter.paint_over(0, layer, pi, paint, paint.alpha, out, planes, blend)
            else:
                meter.paint(0, layer, pi, paint, paint.alpha, out)
                composite_over(out, planes, paint.alpha, blend, out=out)
        meter.end_layer(0, layer)
        results.append((out, meter.stats.layers[0]))
    (out_a, a), (out_b, b) = results
    assert out_a.tobytes() == out_b.tobytes()
    assert a.covered == b.covered and a.parts.keys() == b.parts.keys()
    for name in a.parts:
        _parts_equal(a.parts[name], b.parts[name])


def test_overlay_in_one_pass_declines_rows_that_are_not_contiguous(use):
    # alpha with columns 8 bytes apart: the kernel does nothing and says so; the caller
    # measures, then composites
    from types import SimpleNamespace

    from compose.check.stats import Statistics

    use(True)
    h, w = 20, 30
    alpha = (np.arange(h * 2 * w, dtype=np.float32).reshape(h, 2 * w) % 3 == 0)[:, ::2]
    alpha = alpha.astype(np.float32)[:, :]
    strided = np.zeros((h, 2 * w), np.float32)[:, ::2]
    strided[...] = alpha
    out = _composite(np.random.default_rng(2), h, w, smooth=True)
    before = out.copy()
    layer = SimpleNamespace(spec=SimpleNamespace(name="lines", role="overlay", kind="lines",
                                                 blend="normal"))
    template = Statistics(width=w, height=h, background=(1.0, 1.0, 1.0),
                          layers=[LayerStats(name="lines", role="overlay", kind="lines")])
    meter = M.WindowMeasure(template, SimpleNamespace(row=0, col=0, inner=(slice(0, h), slice(0, w))))
    paint = Paint("stroke", strided, color=(0.2, 0.25, 0.3))
    assert not meter.paint_over(0, layer, 0, paint, strided, out, paint.planes(), "normal")
    assert out.tobytes() == before.tobytes() and not meter.stats.layers[0].parts


@pytest.mark.parametrize("coverage", ["8-bit", "faint", "none"])
@pytest.mark.parametrize("paints", [1, 2])
def test_overlay_weight_and_cover_are_the_exact_sum_of_8bit_coverage(use, coverage, paints):
    # A flat overlay paint's weight, and the layer's cover when it has one paint, are its
    # coverage summed over the core: exactly where every sum of it is exact (8-bit coverage:
    # math.fsum, the correctly rounded sum of the Python standard library, is the reference),
    # else numpy's float32 sum of the core as before; a layer of two paints sums their union.
    import math
    from types import SimpleNamespace

    from compose.check.stats import Statistics

    rng = np.random.default_rng(17)
    h, w, pad = 60, 70, 3
    drawn = rng.random((h, w)) < 0.3
    if coverage == "8-bit":
        alphas = [rng.integers(1, 256, (h, w)).astype(np.float32) / np.float32(255)
                  for _ in range(paints)]
    else:           # 1e-7 beside 1: sums that round (1e-7's float32 spacing is 2**-47)
        alphas = [np.where(rng.random((h, w)) < 0.5, np.float32(1e-7), np.float32(1))
                  .astype(np.float32) for _ in range(paints)]
        if coverage == "none":
            drawn[:] = False
    alphas = [np.where(drawn, a, np.float32(0)).astype(np.float32) for a in alphas]
    inner = (slice(pad, h - pad), slice(pad, w - pad))
    layer = SimpleNamespace(spec=SimpleNamespace(name="lines", role="overlay", kind="lines",
                                                 blend="normal"))
    template = Statistics(width=w, height=h, background=(1.0, 1.0, 1.0),
                          layers=[LayerStats(name="lines", role="overlay", kind="lines")])
    got = []
    for on in (True, False):
        use(on)
        meter = M.WindowMeasure(template, SimpleNamespace(row=0, col=0, inner=inner))
        out = _composite(np.random.default_rng(2), h, w, False)
        meter.begin_layer(0, layer, paints, out)
        for pi, a in enumerate(alphas):
            paint = Paint(("halo", "stroke")[pi], a, color=(0.2, 0.25, 0.3))
            meter.paint(0, layer, pi, paint, a, out)
        meter.end_layer(0, layer)
        stats = meter.stats.layers[0]
        got.append((stats.covered, [float(p.weights[0]) for p in stats.parts.values()]))
    assert got[0] == got[1]                          # compiled and numpy paths alike
    covered, weights = got[0]
    cores = [a[inner] for a in alphas]
    if coverage == "8-bit":
        assert weights == [math.fsum(c.astype(np.float64).ravel()) for c in cores]
    else:
        assert weights == [float(c.sum()) for c in cores]
    if paints == 1 and coverage == "8-bit":
        assert covered == weights[0]
    else:
        assert covered == float(np.ascontiguousarray(np.maximum.reduce(cores)).sum())
    if coverage == "faint":                         # float32 sums of these do round
        assert weights[0] != math.fsum(cores[0].astype(np.float64).ravel())


THEMES = '''
[[layer]]
name = "field2"
role = "theme"
kind = "field"
source = "field.tif"
ramp = "g"
opacity = {opacity}
'''


@pytest.mark.parametrize("variant", ["as-is", "half-transparent", "two-themes-0.4",
                                     "two-themes-0.6"])
@pytest.mark.parametrize("window", [64, 96])
def test_window_statistics_equal_the_numpy_path_bit_for_bit(use, tiny_region, variant, window):
    from compose.engine import prepare, run
    from compose.style import load_style

    text = tiny_region.read_text()
    if variant == "half-transparent":
        text = text.replace('blend = "multiply"', 'blend = "multiply"\nopacity = 0.55')
    elif variant.startswith("two-themes"):  # a second theme over the first (hiding it where
        # it covers more than half), before the overlays
        head, roads = text.split('[[layer]]\nname = "roads"')
        text = (head + THEMES.format(opacity=variant.rsplit("-", 1)[1]) + '[[layer]]\nname = "roads"'
                + roads)
    path = tiny_region.with_name(f"tiny-{variant}.toml")
    path.write_text(text)
    results = []
    for on in (True, False):
        use(on)
        prepared = prepare(load_style(path))
        try:
            results.append(run(prepared, [], window=window))
        finally:
            prepared.close()
    a, b = results
    assert a is not None and b is not None
    themes = colors = 0
    for la, lb in zip(a.layers, b.layers, strict=True):
        assert (la.covered, la.nodata_weight) == (lb.covered, lb.nodata_weight)
        for name in ("value_lightness", "value_color", "value_count"):
            x, y = getattr(la, name), getattr(lb, name)
            assert (x is None) == (y is None)
            if x is not None:
                assert x.tobytes() == y.tobytes(), (la.name, name)
                themes += name == "value_lightness" and bool(x.any())
                colors += name == "value_color" and bool(x.any())
        assert la.parts.keys() == lb.parts.keys()
        for key in la.parts:
            _parts_equal(la.parts[key], lb.parts[key])
    # themes with grey-order counts (kept where alpha > 0.5) and with blended colours (drawn,
    # not under a later theme of alpha > 0.5): every branch of the measure ran
    assert (themes, colors) == {"two-themes-0.4": (1, 2), "two-themes-0.6": (2, 1)}.get(variant, (1, 1))



def test_the_switch_turns_the_compiled_loops_off(monkeypatch):
    monkeypatch.setattr(kernels, "enabled", False)
    assert kernels.get() is None


def _edges(rng, shape, values) -> np.ndarray:
    """float32 array of ``shape`` drawn from ``values`` and each value's float32 neighbours."""
    v = np.asarray(values, np.float32)
    pool = np.concatenate([v, np.nextafter(v, np.float32(-1)), np.nextafter(v, np.float32(2))])
    return np.clip(rng.choice(pool, shape), 0, 1).astype(np.float32)


@pytest.mark.parametrize("first_opaque", [True, False])
def test_gray_order_at_its_thresholds_equals_the_numpy_path(use, first_opaque):
    # Two themes, the second over the first, with alpha and overlay cover on and beside the
    # thresholds (kept where alpha > 0.5 and cover < 0.02; hidden under a later alpha > 0.5).
    from types import SimpleNamespace

    from compose.check.stats import N_LIGHTNESS, Statistics

    rng = np.random.default_rng(21)
    h, w, n = 37, 45, 40
    layers = [LayerStats(name=f"t{i}", role="theme", kind="field", values=np.arange(n, dtype=float),
                         value_lightness=np.zeros((n, N_LIGHTNESS)), value_color=np.zeros((n, 3)),
                         value_count=np.zeros(n)) for i in range(2)]
    template = Statistics(width=w, height=h, layers=layers, background=(1.0, 1.0, 1.0))
    planes8 = rng.integers(0, 256, (3, h, w)).astype(np.uint8)
    rgb8 = np.ascontiguousarray(np.moveaxis(planes8, 0, -1))
    alphas = [np.ones((h, w), np.float32) if first_opaque else _edges(rng, (h, w), [0, 1e-6, 0.5, 1]),
              _edges(rng, (h, w), [0, 0.5, 0.7, 1])]
    indices = [rng.integers(3, 30, (h, w)).astype(np.uint16), rng.integers(0, n, (h, w)).astype(np.int32)]
    hidden = _edges(rng, (h, w), [0, 0.02, 0.3])
    results = []
    for source in (None, planes8):      # the composite as (h, w, 3) pixels or as planes
        for on in (True, False):
            use(on)
            window = SimpleNamespace(row=1, col=2, inner=(slice(0, h), slice(0, w)))
            meter = M.WindowMeasure(template, window)
            meter._themes = [(0, indices[0], alphas[0], first_opaque, None),
                              (1, indices[1], alphas[1], False, None)]
            meter._hidden = hidden
            results.append(meter.finish(rgb8, source))
    for stats in results[1:]:
        for la, lb in zip(results[0].layers, stats.layers):
            for name in ("value_lightness", "value_color", "value_count"):
                assert getattr(la, name).tobytes() == getattr(lb, name).tobytes(), (la.name, name)
    assert results[0].layers[0].value_color.any() and results[0].layers[1].value_lightness.any()


@pytest.mark.parametrize("canvas", ["small", "large"])
@pytest.mark.parametrize("cover", [True, False])
@pytest.mark.parametrize("index_type", [np.uint16, np.uint8, np.int64])
def test_gray_order_of_one_opaque_theme_equals_the_numpy_path(use, cover, index_type, canvas):
    # One opaque theme (the kernel's own loops for uint16 entries under overlays and under none;
    # any other index type takes its general loop), sampled from a window at an odd place; on
    # a canvas of 16 Mpixel or more every 4th row and column (compose.check.stats.gray_stride)
    from types import SimpleNamespace

    from compose.check.stats import N_LIGHTNESS, Statistics, gray_stride

    rng = np.random.default_rng(5)
    h, w, n = 41, 38, 200
    layer = LayerStats(name="t", role="theme", kind="field", values=np.arange(n, dtype=float),
                       value_lightness=np.zeros((n, N_LIGHTNESS)), value_color=np.zeros((n, 3)),
                       value_count=np.zeros(n))
    side = (w, h) if canvas == "small" else (4096, 4096)    # the window's own canvas, or a large one
    template = Statistics(width=side[0], height=side[1], layers=[layer], background=(1.0, 1.0, 1.0))
    step = gray_stride(*side)
    assert step == (2 if canvas == "small" else 4)
    planes8 = rng.integers(0, 256, (3, h, w)).astype(np.uint8)
    planes8[:, :10] = 77                # a flat colour: L* of the previous pixel again
    rgb8 = np.ascontiguousarray(np.moveaxis(planes8, 0, -1))
    index = rng.integers(17, n, (h, w)).astype(index_type)
    alpha = np.ones((h, w), np.float32)
    hidden = _edges(rng, (h, w), [0, 0.02, 0.3]) if cover else None
    results = []
    for on in (True, False):
        use(on)
        window = SimpleNamespace(row=3, col=1, inner=(slice(0, h), slice(0, w)))
        meter = M.WindowMeasure(template, window)
        # the index's counts over the core (as the engine passes them) or none
        meter._themes = [(0, index, alpha, True, np.bincount(index.ravel(), minlength=n) if on else None)]
        meter._hidden = hidden
        results.append(meter.finish(rgb8, planes8))
    a, b = (r.layers[0] for r in results)
    for name in ("value_lightness", "value_color", "value_count"):
        assert getattr(a, name).tobytes() == getattr(b, name).tobytes(), name
    # checked against the pixels themselves: every sample counted once, where not covered
    kept = np.ones((h, w), bool) if hidden is None else hidden < 0.02
    # the canvas's own grid: rows 4, 6, ..., columns 2, 4, ... (step 2: window row 3, column 1);
    # rows 4, 8, ..., columns 4, 8, ... (step 4)
    sampled = kept[1::2, 1::2] if step == 2 else kept[1::4, 3::4]
    assert a.value_lightness.sum() == a.value_count.sum() == sampled.sum() > 0
    if index_type is np.uint16:     # the colour sums: each sample's linear-light channels
        lin = M._LINEAR8[planes8[:, 1::step, (1 if step == 2 else 3)::step]]
        sub = index[1::step, (1 if step == 2 else 3)::step]
        got = np.zeros((n, 3))
        for c in range(3):
            got[:, c] = np.bincount(sub[sampled], weights=lin[c][sampled], minlength=n)
        np.testing.assert_allclose(a.value_color, got, rtol=1e-12)


@pytest.mark.parametrize("entries", [1, 2])
def test_gray_order_of_a_flat_window_counts_past_65535_like_the_numpy_path(use, entries):
    # A 512 x 512 window of one colour: its 256 x 256 = 65536 samples fall in one or two
    # (entry, L*) cells, far more than the kernel's 8-bit counters hold (they wrap: 256 is
    # added at once, the same whole number); compared with the numpy path (np.bincount)
    from types import SimpleNamespace

    from compose.check.stats import N_LIGHTNESS, Statistics

    h = w = 512
    n = 4
    layer = LayerStats(name="t", role="theme", kind="field", values=np.arange(n, dtype=float),
                       value_lightness=np.zeros((n, N_LIGHTNESS)), value_color=np.zeros((n, 3)),
                       value_count=np.zeros(n))
    template = Statistics(width=w, height=h, layers=[layer], background=(1.0, 1.0, 1.0))
    planes8 = np.full((3, h, w), 131, np.uint8)
    rgb8 = np.ascontiguousarray(np.moveaxis(planes8, 0, -1))
    index = np.full((h, w), 2, np.uint16)
    if entries == 2:
        index[:, ::4] = 1           # every other sample: 32768 in each of two cells
    alpha = np.ones((h, w), np.float32)
    results = []
    for on in (True, False):
        use(on)
        window = SimpleNamespace(row=0, col=0, inner=(slice(0, h), slice(0, w)))
        meter = M.WindowMeasure(template, window)
        meter._themes = [(0, index, alpha, True, np.bincount(index.ravel(), minlength=n))]
        results.append(meter.finish(rgb8, planes8))
    a, b = (r.layers[0] for r in results)
    for name in ("value_lightness", "value_color", "value_count"):
        assert getattr(a, name).tobytes() == getattr(b, name).tobytes(), name
    assert a.value_lightness.max() == 65536 // entries
    assert a.value_count.sum() == 65536


@pytest.mark.parametrize("strided", [False, True])
def test_eight_bit_conversion_equals_the_numpy_path(use, strided):
    # np.clip to [0, 1], x 255, np.rint (half to even) and the cast: the same bytes, on the
    # rounding edges (k + 0.5) / 255 and their float32 neighbours, outside [0, 1], and NaN
    from compose.engine import _to_8bit

    rng = np.random.default_rng(4)
    full = rng.random((3, 70, 90), dtype=np.float32) * np.float32(1.2) - np.float32(0.1)
    edges = (np.arange(256, dtype=np.float32) + np.float32(0.5)) / np.float32(255)
    flat = full.reshape(-1)
    flat[:256], flat[256:512] = edges, np.nextafter(edges, np.float32(2))
    flat[512:768], flat[768] = np.nextafter(edges, np.float32(-1)), np.nan
    core = (slice(None), slice(3, 67), slice(3, 87)) if strided else (slice(None),) * 3
    results = []
    for on in (True, False):
        use(on)
        with np.errstate(invalid="ignore"):     # numpy warns on casting NaN
            results.append(_to_8bit(full.copy()[core]))
    for a, b in zip(*results):
        assert a.shape == b.shape and a.dtype == b.dtype == np.uint8
        assert a.tobytes() == b.tobytes()


def test_a_build_older_than_its_source_is_not_used(tmp_path, capsys):
    # An editable install builds the extension once; a checkout that changes the C source later
    # must not run the old loops (compose.kernels.stale).
    import os

    from compose import kernels

    built, source = tmp_path / "_kernels.so", tmp_path / "_kernels.c"
    built.write_bytes(b"")
    source.write_text("")
    os.utime(built, (1000, 1000))
    os.utime(source, (2000, 2000))
    assert kernels.stale(str(built))
    assert "older than" in capsys.readouterr().err
    os.utime(built, (3000, 3000))
    assert not kernels.stale(str(built))
    source.unlink()                     # an installed package: no C source beside it
    assert not kernels.stale(str(built))


def test_a_stale_build_is_reported_once_and_not_when_turned_off(tmp_path, capsys, monkeypatch):
    # compose.kernels.get: a build older than its source gives the numpy path and one line on
    # stderr for the process (the answer is kept), none at all with COMPOSE_KERNELS=off
    import os

    from compose import kernels

    built, source = tmp_path / "_kernels.so", tmp_path / "_kernels.c"
    built.write_bytes(b"")
    source.write_text("")
    os.utime(built, (1000, 1000))
    os.utime(source, (2000, 2000))
    real = kernels.stale
    monkeypatch.setattr(kernels, "stale", lambda _: real(str(built)))
    monkeypatch.setattr(kernels, "_loaded", [])
    monkeypatch.setattr(kernels, "enabled", False)
    assert kernels.get() is None
    assert capsys.readouterr().err == "" and kernels._loaded == []
    monkeypatch.setattr(kernels, "enabled", True)
    assert kernels.get() is None and kernels.get() is None
    err = capsys.readouterr().err
    assert err.count("older than") == 1 and err.count("\n") == 1


def test_benchmarks_refuse_a_stale_build(tmp_path, capsys, monkeypatch):
    # compose.kernels.state: what the benchmarks print; a build older than its source is the
    # numpy path, so a benchmark's figures would not be the build's: refused (SystemExit)
    import os

    from compose import kernels

    built, source = tmp_path / "_kernels.so", tmp_path / "_kernels.c"
    built.write_bytes(b"")
    source.write_text("")
    os.utime(built, (1000, 1000))
    os.utime(source, (2000, 2000))
    real = kernels.stale
    monkeypatch.setattr(kernels, "stale", lambda _: real(str(built)))
    assert kernels.state().startswith("numpy: stale build")
    with pytest.raises(SystemExit, match="refusing to measure"):
        kernels.state(refuse_stale=True)
    os.utime(built, (3000, 3000))
    assert kernels.state(refuse_stale=True) in ("compiled", "numpy: compose._kernels is not built")
    monkeypatch.setattr(kernels, "enabled", False)
    assert kernels.state(refuse_stale=True) == "numpy: turned off by COMPOSE_KERNELS"
    capsys.readouterr()


@pytest.mark.parametrize("directions", [1, 3, 6])
@pytest.mark.parametrize("per_row", [False, True])
@pytest.mark.parametrize("holes", [False, True, "edges"])
def test_hillshade_equals_the_numpy_strips_bit_for_bit(use, directions, per_row, holes):
    # Horn's gradient and the weighted Lambertian suns in float32, the same bits; a DEM with
    # no-data holes goes back to the numpy strips (their reflection at holes) and still agrees
    from compose.layers.hillshade import multidirectional

    rng = np.random.default_rng(8)
    y, x = np.mgrid[0:83, 0:117].astype(np.float32)
    dem = (np.sin(x / 7) * np.cos(y / 11) * 300 + rng.normal(0, 20, x.shape) + 900).astype(np.float32)
    dem[40:44, 10:50] = 900                        # flat ground: shade sin(altitude) exactly
    if holes:
        dem[20:25, 60:70] = np.nan
    if holes == "edges":        # a window's margin off the raster, single cells, pairs, a line
        dem[:2] = np.nan
        dem[:, -1] = np.nan
        dem[50, 30] = dem[60, 31] = dem[60, 33] = dem[70, 40] = np.nan
        dem[30:33, 90] = np.nan
        dem[75, 5:9] = np.nan
        dem[55, 100] = np.inf       # a gradient inf - inf: NaN next to a cell that is not
    dx = np.linspace(18.0, 31.0, dem.shape[0]) if per_row else 30.0
    results = []
    for on in (True, False):
        use(on)
        with np.errstate(invalid="ignore"):     # inf - inf
            results.append(multidirectional(dem, dx, 29.0, azimuth=300.0, altitude=40.0,
                                            exaggeration=2.5, directions=directions))
    a, b = results
    assert a.dtype == b.dtype == np.float32 and a.tobytes() == b.tobytes()
    assert np.isnan(a).any() == bool(holes)


@pytest.mark.parametrize("mode", ["normal", "multiply", "screen"])
@pytest.mark.parametrize("coverage", ["opaque", "float", "scalar"])
@pytest.mark.parametrize("strided", [False, True])
@pytest.mark.parametrize("runs", [False, True])
def test_palette_composite_equals_the_numpy_strips_bit_for_bit(use, mode, coverage, strided, runs):
    # The lookup, the W3C blend (normal: Cs - Cb; multiply: Cb Cs - Cb), alpha and Cb + mix in
    # float32, the same bits; the entries' counts over a region equal np.bincount's (entries
    # scattered, or in long runs as a smooth raster's are)
    from compose.composite import composite_palette

    rng = np.random.default_rng(5)
    n, h, w = 37, 61, 83
    table = rng.random((3, n), dtype=np.float32)
    index = rng.integers(0, n, (h, w)).astype(np.uint16)
    if runs:
        index = ((np.arange(w)[None, :] // 23 + np.arange(h)[:, None] // 9) % n).astype(np.uint16)
    back = _composite(rng, h, 2 * w, smooth=False)
    if coverage == "opaque":
        alpha = np.ones((h, w), np.float32)
    elif coverage == "float":
        alpha = rng.random((h, w), dtype=np.float32)
        alpha[::7] = 0
    else:
        alpha = np.float32(0.37)
    region = (slice(2, h - 3), slice(4, w - 1))
    results = []
    for on in (True, False):
        use(on)
        full = back.copy()
        target = full[:, :, ::2] if strided else np.ascontiguousarray(full[:, :, :w])
        counts = np.zeros(n, np.intp)
        composite_palette(target, table, index, alpha, mode, opaque=coverage == "opaque",
                          counts=counts, region=region)
        results.append((target.copy(), counts))
    (a, ca), (b, cb) = results
    assert a.tobytes() == b.tobytes()
    assert ca.tobytes() == cb.tobytes()
    assert ca.tobytes() == np.bincount(index[region].ravel(), minlength=n).tobytes()


def _luts():
    """Tables of every index path: even samples, equal steps, uneven (quantile) steps, a
    threshold's two even runs."""
    from compose.ramps import build_ramps

    through = [{"L": 95, "C": 12, "h": 100}, {"L": 60, "C": 36, "h": 135}, {"L": 27, "C": 20, "h": 165}]
    seq = {"kind": "sequential", "domain": [0, 12], "through": through}
    tables = {"even": seq, "steps": {**seq, "steps": 7},
              "quantile": {**seq, "steps": 5, "step_method": "quantile"},
              "warm": {"kind": "threshold", "domain": [14, 30], "at": 26,
                       "below": through[:2], "above": through[1:]}}
    Table = type("Table", (), {})
    named = {}
    for name, table in tables.items():
        t = Table()
        t.name, t.table, t.path = name, table, ROOT / "styles" / "test.toml"
        named[name] = t
    ramps = build_ramps(named)
    luts = {name: ramp.lut() for name, ramp in ramps.items()}
    data = np.random.default_rng(2).gamma(2.0, 2.0, 5000)
    luts["quantile"] = luts["quantile"].with_quantile_breaks(data)
    assert luts["even"].width is not None and luts["quantile"].width is None
    assert luts["warm"].split is not None
    return luts


@pytest.mark.parametrize("name", ["even", "steps", "quantile", "warm"])
@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_lookup_table_index_equals_the_numpy_path(use, name, dtype):
    # value -> entry on the table's edges and their float neighbours, outside the domain,
    # infinities and NaN: the same uint16 indices as Lut.index (compose.ramps.lut)
    from compose.layers.raster import lut_index

    lut = _luts()[name]
    rng = np.random.default_rng(9)
    lo, hi = float(lut.edges[0]), float(lut.edges[-1])
    edges = np.asarray(lut.edges, dtype)
    pool = np.concatenate([edges, np.nextafter(edges, dtype(-np.inf)), np.nextafter(edges, dtype(np.inf)),
                           np.asarray(lut.values, dtype), [np.nan, np.inf, -np.inf]]).astype(dtype)
    values = np.where(rng.random((67, 71)) < 0.5, rng.choice(pool, (67, 71)),
                      rng.uniform(lo - 2, hi + 2, (67, 71))).astype(dtype)
    strided = np.repeat(values, 2, axis=1)[:, ::2]      # not contiguous
    results = []
    for on in (True, False):
        use(on)
        results.append([lut_index(lut, values), lut_index(lut, strided)])
    reference = lut.index(values)
    for got in results[0] + results[1]:
        assert got.dtype == np.uint16 and got.tobytes() == reference.tobytes()
    assert {lut.n, lut.n + 1, lut.n + 2} <= set(np.unique(reference).tolist())


def test_relief_levels_equal_the_numpy_path(use):
    # shade x (LEVELS - 1) rounded half to even, the no-data entry where not finite
    from compose.layers.relief import LEVELS, shade_levels

    rng = np.random.default_rng(6)
    shade = rng.random((59, 77), dtype=np.float32)
    n = LEVELS - 1          # shades whose float32 product with n lies half-way between k, k + 1
    near = (np.arange(n, dtype=np.float32) + np.float32(0.5)) / np.float32(n)
    bits = near.view(np.uint32)[:, None].astype(np.int64) + np.arange(-4, 5)[None, :]
    candidates = bits.astype(np.uint32).view(np.float32).ravel()
    product = candidates * np.float32(n)
    ties = candidates[product - np.floor(product) == 0.5]
    assert ties.size >= n
    flat = shade.reshape(-1)
    flat[:ties.size] = ties
    flat[ties.size:ties.size + n] = np.nextafter(near, np.float32(2))
    flat[-5:] = [np.nan, np.inf, -np.inf, 0, 1]
    results = []
    for on in (True, False):
        use(on)
        results.append(shade_levels(shade.copy()))
    (ia, aa), (ib, ab) = results
    assert ia.dtype == ib.dtype == np.uint16 and ia.tobytes() == ib.tobytes()
    assert aa.dtype == ab.dtype == np.float32 and aa.tobytes() == ab.tobytes()
    assert (ia == LEVELS).sum() == 3 and aa.sum() == shade.size - 3


@pytest.mark.parametrize("k", [1, 3, 7])
@pytest.mark.parametrize("strided", [False, True])
def test_box_sums_equal_the_numpy_path_bit_for_bit(use, k, strided):
    # blocks of the canvas grid cut by the window's edges, rows then columns, in float32
    from compose.previews import block_sums

    rng = np.random.default_rng(12)
    full = rng.random((3, 53, 2 * 61), dtype=np.float32)
    planes = full[:, :, ::2] if strided else np.ascontiguousarray(full[:, :, :61])
    results = []
    for on in (True, False):
        use(on)
        results.append([block_sums(planes, row0, col0, k) for row0, col0 in
                        ((0, 0), (5, 9), (k - 1, 1), (130, 257))])
    for (ra, ca, a), (rb, cb, b) in zip(*results):
        assert (ra, ca) == (rb, cb) and a.dtype == b.dtype == np.float32
        assert a.shape == b.shape and a.tobytes() == b.tobytes()


@pytest.mark.parametrize("blend", ["normal", "multiply"])
def test_layer_previews_equal_the_numpy_path_bit_for_bit(use, tiny_region, blend):
    # a render's preview sums (rasters' colours looked up as they are summed, the stacks, the
    # finished map) and the preview images, kernels on and off
    from compose.engine import prepare, run
    from compose.previews import LayerPreviews
    from compose.style import load_style

    path = tiny_region.with_name(f"tiny-previews-{blend}.toml")
    path.write_text(tiny_region.read_text().replace('blend = "multiply"', f'blend = "{blend}"'))
    results = []
    for on in (True, False):
        use(on)
        prepared = prepare(load_style(path))
        try:
            previews = LayerPreviews(prepared.canvas.width, prepared.canvas.height,
                                     len(prepared.layers), tuple(prepared.style.map.background),
                                     factor=3, blends=[la.spec.blend for la in prepared.layers])
            run(prepared, [], window=64, previews=previews)
        finally:
            prepared.close()
        results.append(previews)
    a, b = results
    assert a.final.tobytes() == b.final.tobytes()
    for sa, sb in zip(a.stacks, b.stacks):
        assert (sa is None) == (sb is None) and (sa is None or sa.tobytes() == sb.tobytes())
    rasters = 0
    for pa, pb in zip(a.paints, b.paints):
        assert pa.keys() == pb.keys()
        for key in pa:
            assert pa[key].alpha.tobytes() == pb[key].alpha.tobytes()
            assert (pa[key].weighted is None) == (pb[key].weighted is None)
            if pa[key].weighted is not None:
                rasters += 1
                assert pa[key].weighted.tobytes() == pb[key].weighted.tobytes()
    assert rasters >= 2
    for (alone_a, stack_a), (alone_b, stack_b) in zip(a.images(), b.images()):
        assert alone_a.tobytes() == alone_b.tobytes() and stack_a.tobytes() == stack_b.tobytes()


@pytest.mark.parametrize("mode", ["normal", "multiply"])
@pytest.mark.parametrize("opaque", [False, True])
@pytest.mark.parametrize("strided", [False, True])
def test_flat_color_composite_equals_the_numpy_strips_bit_for_bit(use, mode, opaque, strided):
    # a line's flat colour over the composite (W3C normal and multiply, alpha, Cb + mix), as
    # Paint.planes gives it: a broadcast view
    from compose.composite import composite_over

    rng = np.random.default_rng(14)
    h, w = 47, 69
    back = _composite(rng, h, 2 * w, smooth=True)
    alpha = np.ones((h, w), np.float32) if opaque else (
        rng.integers(0, 256, (h, w)).astype(np.float32) / np.float32(255))
    color = np.broadcast_to(np.array([0.2, 0.7, 0.45], np.float32).reshape(3, 1, 1), (3, h, w))
    results = []
    for on in (True, False):
        use(on)
        full = back.copy()
        target = full[:, :, ::2] if strided else np.ascontiguousarray(full[:, :, :w])
        composite_over(target, color, alpha, mode, out=target, opaque=opaque)
        results.append(target.copy())
    assert results[0].tobytes() == results[1].tobytes()
    assert not np.array_equal(results[0], back[:, :, ::2] if strided else back[:, :, :w])


@pytest.mark.parametrize("holes", [False, True])
@pytest.mark.parametrize("reach", ["inside", "edges", "outside"])
def test_bilinear_read_equals_the_numpy_path_bit_for_bit(use, holes, reach):
    """compose.sources.resample.sample_centres' plain bilinear read (positions -> taps -> the 4
    gathers -> the float32 lerps, then the no-data renormalisation): compiled against numpy,
    bit for bit (NaN where both give NaN), on a rotated, stretched grid of positions that stays
    inside the source, touches its edges or reaches beyond it (NaN cells there, as the
    readers give). Random source cells; the numpy path is the reference
    (tests/sources/test_resample.py checks it against bilinear interpolation's formula)."""
    from compose.sources import resample as R

    rng = np.random.default_rng(15)
    src = rng.uniform(-500.0, 3000.0, (60, 70)).astype(np.float32)
    if holes:
        src[rng.random(src.shape) < 0.1] = np.nan
        src[20:30, 5:9] = np.nan

    def read(r, c, h, w):
        return R.cut_block(src, r, c, h, w)

    a = np.radians(7.0)
    j, i = np.meshgrid(np.arange(48, dtype=np.float64), np.arange(40, dtype=np.float64))
    x = 3.3 + j * 1.13 * np.cos(a) - i * 0.97 * np.sin(a)
    y = 1.7 + j * 1.13 * np.sin(a) + i * 0.97 * np.cos(a)
    if reach == "edges":
        x[0, :] = 0.0
        y[:, 0] = 0.0
        x[-1, :] = src.shape[1] - 1.0
    elif reach == "outside":
        x, y = x - 8.25, y - 5.5
    got = {}
    for on in (True, False):
        use(on)
        R.forget_taps()
        got[on] = R.sample_centres(read, x, y, "bilinear")
    assert got[True].dtype == got[False].dtype == np.float32
    np.testing.assert_array_equal(got[True].view(np.uint32) * ~np.isnan(got[True]),
                                  got[False].view(np.uint32) * ~np.isnan(got[False]))
    np.testing.assert_array_equal(np.isnan(got[True]), np.isnan(got[False]))
    assert np.isfinite(got[False]).any()
    if holes or reach == "outside":
        assert np.isnan(got[False]).any()
