"""Histogram statistics against general-purpose references (numpy, scipy.stats)."""
import numpy as np
import pytest
from scipy import stats as sps

from compose.check.stats import contrast_bins, lightness_of_rgb8, spearman_from_table, weighted_percentiles


def test_spearman_from_table_equals_scipy_with_ties():
    # Outside reference: scipy.stats.spearmanr on the expanded samples (tie-corrected rho).
    rng = np.random.default_rng(3)
    x = rng.integers(0, 12, 4000)
    y = np.clip(np.rint(x * 3 + rng.normal(0, 6, x.size)), 0, 60).astype(int)
    table = np.zeros((12, 61))
    np.add.at(table, (x, y), 1)
    rho = spearman_from_table(table, np.arange(12, dtype=float), np.arange(61, dtype=float))
    assert rho == pytest.approx(sps.spearmanr(x, y).statistic, abs=1e-9)


def test_spearman_unordered_row_values_and_nan_rows():
    table = np.array([[0, 5.0], [5.0, 0], [3.0, 3.0]])
    rows = np.array([2.0, 1.0, np.nan])  # row 0 has the larger value; the NaN row is ignored
    assert spearman_from_table(table, rows, np.array([0.0, 1.0])) == pytest.approx(1.0)


def test_weighted_percentiles_match_numpy_inverted_cdf():
    # Outside reference: numpy.percentile(method="inverted_cdf") on repeated samples.
    rng = np.random.default_rng(4)
    v = rng.normal(size=50)
    w = rng.integers(1, 6, 50)
    expanded = np.repeat(v, w)
    got = weighted_percentiles(v, w.astype(float), (5, 50, 95))
    want = np.percentile(expanded, [5, 50, 95], method="inverted_cdf")
    np.testing.assert_allclose(got, want)


def test_contrast_bins_put_thresholds_on_edges():
    # WCAG understanding docs: thresholds are not rounded, 2.999:1 does not meet 3:1.
    b = contrast_bins(np.array([2.999, 3.0, 4.4999, 4.5, 21.0]))
    assert b[0] < b[1] and b[1] == 200 and b[2] < b[3] and b[3] == 350 and b[4] == 1999


def test_lightness_of_rgb8_matches_colour_science():
    colour = pytest.importorskip("colour")
    rng = np.random.default_rng(5)
    rgb8 = rng.integers(0, 256, (1000, 3), dtype=np.uint8)
    want = colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb8 / 255.0))[:, 0]
    np.testing.assert_allclose(lightness_of_rgb8(rgb8), want, atol=1e-3)


def test_entry_rows_of_windows_merge_like_dense_tables():
    # numpy addition of dense (n, ...) tables is the reference: windows that measured only some
    # entries' rows must sum, in any process, to the same float64 bits as their dense tables
    import pickle

    from compose.check.stats import N_LIGHTNESS, LayerStats

    rng = np.random.default_rng(12)
    n = 300
    template = LayerStats("t", "theme", "field", values=np.arange(n, dtype=float),
                          value_lightness=np.zeros((n, N_LIGHTNESS)), value_color=np.zeros((n, 3)),
                          value_count=np.zeros(n))
    dense = {k: np.zeros_like(getattr(template, k))
             for k in ("value_lightness", "value_color", "value_count")}
    windows = []
    for lo, m in ((40, 100), (0, 7), (250, 50), (120, 1), (60, 0)):
        w = template.empty_like()
        assert w.measures("value_lightness") and w.__dict__.get("_value_lightness_dense") is None
        for k, trailing in (("value_lightness", (N_LIGHTNESS,)), ("value_color", (3,)),
                            ("value_count", ())):
            if m:
                block = rng.integers(0, 50, (m,) + trailing).astype(float) * rng.random()
                dense[k][lo:lo + m] += block
                w.add_rows(k, lo, block.copy())
        windows.append(w)
    acc = windows[0]                                   # the first window's own, as the walk does
    for w in windows[1:]:
        acc.merge(pickle.loads(pickle.dumps(w)))       # as from a worker process
    for k, want in dense.items():
        np.testing.assert_array_equal(getattr(acc, k), want)
    # a window read on its own is its dense table: zeros outside its rows
    one = template.empty_like()
    one.add_rows("value_count", 5, np.array([2.0, 3.0]))
    assert one.value_count.shape == (n,) and one.value_count.sum() == 5.0
    np.testing.assert_array_equal(template.empty_like().value_lightness, np.zeros((n, N_LIGHTNESS)))
    assert not LayerStats("o", "overlay", "lines").measures("value_lightness")
