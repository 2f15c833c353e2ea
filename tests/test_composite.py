"""Blend modes and source-over against W3C Compositing and Blending Level 1.

Source: https://www.w3.org/TR/compositing-1/, "Separable blend modes" (B(Cb, Cs) per mode) and
"Blending" (general formula; with an opaque backdrop Co = (1 - as) Cb + as B(Cb, Cs)).
Expected values are worked by hand from those formulas in the comments.
"""
import math

import numpy as np
import pytest

import compose.composite as comp
from compose.composite import BLEND_MODES, blend_mode, composite_layers, composite_over, composite_palette
from compose.errors import StyleError

# (mode, cb, cs, expected B(cb, cs)) -- hand-computed from the W3C formulas
CASES = [
    ("normal", 0.5, 0.4, 0.4),                 # B = Cs
    ("multiply", 0.5, 0.4, 0.2),               # 0.5 * 0.4
    ("screen", 0.5, 0.4, 0.7),                 # 0.5 + 0.4 - 0.2
    # overlay = HardLight(Cs, Cb): hard-light with the backdrop as the "source" argument
    ("overlay", 0.3, 0.8, 0.48),               # Cb <= .5: multiply(0.8, 2*0.3) = 0.48
    ("overlay", 0.7, 0.8, 0.88),               # Cb > .5: screen(0.8, 0.4) = 0.8 + 0.4 - 0.32
    ("overlay", 0.5, 0.6, 0.6),                # Cb = .5 (<= branch): multiply(0.6, 1.0)
    # soft-light, Cs <= 0.5: Cb - (1 - 2Cs) Cb (1 - Cb)
    ("soft-light", 0.6, 0.2, 0.456),           # 0.6 - 0.6*0.6*0.4 = 0.6 - 0.144
    ("soft-light", 0.6, 0.5, 0.6),             # (1 - 2*0.5) = 0: unchanged
    # soft-light, Cs > 0.5, Cb <= 0.25: D = ((16 Cb - 12) Cb + 4) Cb
    # Cb = 0.2: D = ((3.2 - 12) * 0.2 + 4) * 0.2 = (-1.76 + 4) * 0.2 = 0.448
    ("soft-light", 0.2, 0.75, 0.324),          # 0.2 + 0.5 * (0.448 - 0.2) = 0.324
    # soft-light, Cs > 0.5, Cb > 0.25: D = sqrt(Cb); Cb = 0.64 -> D = 0.8
    ("soft-light", 0.64, 0.9, 0.768),          # 0.64 + 0.8 * (0.8 - 0.64) = 0.768
    # D is continuous at Cb = 0.25: ((4 - 12) * 0.25 + 4) * 0.25 = 0.5 = sqrt(0.25)
    ("soft-light", 0.25, 1.0, 0.5),            # 0.25 + 1 * (0.5 - 0.25)
]


@pytest.mark.parametrize("mode, cb, cs, expected", CASES)
def test_blend_formulas(mode, cb, cs, expected):
    b = BLEND_MODES[mode](np.float32(cb), np.float32(cs))
    assert float(b) == pytest.approx(expected, abs=1e-6)


def test_overlay_is_hard_light_swapped_and_modes_vectorise():
    rng = np.random.default_rng(0)
    cb = rng.random((3, 5, 6), dtype=np.float32)
    cs = rng.random((3, 5, 6), dtype=np.float32)
    np.testing.assert_array_equal(comp.overlay(cb, cs), comp.hard_light(cs, cb))
    for name, func in BLEND_MODES.items():
        out = func(cb, cs)
        assert out.shape == cb.shape and out.dtype == np.float32, name
        assert out.min() >= -1e-6 and out.max() <= 1 + 1e-6, name
    # soft-light element by element against a scalar transcription of the spec
    for b, s, o in zip(cb.ravel(), cs.ravel(), comp.soft_light(cb, cs).ravel()):
        if s <= 0.5:
            ref = b - (1 - 2 * s) * b * (1 - b)
        else:
            d = ((16 * b - 12) * b + 4) * b if b <= 0.25 else math.sqrt(b)
            ref = b + (2 * s - 1) * (d - b)
        assert o == pytest.approx(ref, abs=1e-6)


def planes(value, shape=(4, 5)):
    return np.broadcast_to(np.asarray(value, np.float32).reshape(3, 1, 1), (3, *shape)).copy()


@pytest.mark.parametrize("mode", list(BLEND_MODES))
def test_alpha_zero_leaves_backdrop(mode):
    cb, cs = planes([0.2, 0.5, 0.9]), planes([0.7, 0.1, 0.4])
    out = composite_over(cb, cs, np.zeros((4, 5), np.float32), mode)
    np.testing.assert_array_equal(out, cb)


def test_alpha_one_normal_gives_source_and_multiply_gives_product():
    cb, cs = planes([0.2, 0.5, 0.9]), planes([0.7, 0.1, 0.4])
    one = np.ones((4, 5), np.float32)
    np.testing.assert_allclose(composite_over(cb, cs, one), cs, atol=1e-7)
    np.testing.assert_allclose(composite_over(cb, cs, one, "multiply"), cb * cs, atol=1e-7)


def test_partial_opacity():
    # Co = (1 - a) Cb + a B(Cb, Cs): a = 0.25, multiply(0.5, 0.4) = 0.2
    # -> 0.75 * 0.5 + 0.25 * 0.2 = 0.425; normal -> 0.75 * 0.5 + 0.25 * 0.4 = 0.475
    cb, cs = planes([0.5] * 3), planes([0.4] * 3)
    a = np.full((4, 5), 0.25, np.float32)
    np.testing.assert_allclose(composite_over(cb, cs, a, "multiply"), 0.425, atol=1e-6)
    np.testing.assert_allclose(composite_over(cb, cs, a, "normal"), 0.475, atol=1e-6)
    # screen(0.5, 0.4) = 0.7 -> 0.75 * 0.5 + 0.25 * 0.7 = 0.55
    np.testing.assert_allclose(composite_over(cb, cs, a, "screen"), 0.55, atol=1e-6)


def test_constant_source_in_place_and_strips(monkeypatch):
    rng = np.random.default_rng(1)
    cb = rng.random((3, 37, 11), dtype=np.float32)
    alpha = rng.random((37, 11), dtype=np.float32)
    colour = np.array([0.3, 0.6, 0.8], np.float32)
    full = np.broadcast_to(colour.reshape(3, 1, 1), cb.shape)
    for mode in BLEND_MODES:
        ref = cb + alpha * (BLEND_MODES[mode](cb, full) - cb)
        monkeypatch.setattr(comp, "STRIP_PIXELS", 40)
        got = composite_over(cb, colour.reshape(3, 1, 1), alpha, mode)
        np.testing.assert_allclose(got, ref, atol=1e-6)
        monkeypatch.setattr(comp, "STRIP_PIXELS", 10**6)
        np.testing.assert_allclose(composite_over(cb, full, alpha, mode), got, atol=1e-7)
        inplace = cb.copy()
        res = composite_over(inplace, colour, alpha, mode, out=inplace)
        assert res is inplace
        np.testing.assert_allclose(inplace, got, atol=1e-7)



@pytest.mark.parametrize("strip", [40, 10**6])
def test_palette_source_equals_gathered_planes(monkeypatch, strip):
    # composite_palette looks the table up strip by strip; it must give the very numbers of
    # composite_over on the gathered (3, H, W) source (which the W3C cases above pin down),
    # for every mode, with alpha in (0, 1) and with alpha 1 everywhere (opaque: the
    # multiplication by alpha skipped, x * 1 = x exactly in IEEE 754)
    monkeypatch.setattr(comp, "STRIP_PIXELS", strip)
    rng = np.random.default_rng(5)
    table = rng.random((3, 300), dtype=np.float32)
    index = rng.integers(0, 300, (37, 11)).astype(np.uint16)
    cb = rng.random((3, 37, 11), dtype=np.float32)
    for mode in BLEND_MODES:
        for alpha, opaque in ((rng.random((37, 11), dtype=np.float32), False),
                              (np.ones((37, 11), np.float32), True)):
            ref = composite_over(cb, table[:, index], alpha, mode)
            got = composite_palette(cb.copy(), table, index, alpha, mode, opaque=opaque)
            assert np.array_equal(got, ref), mode
            if opaque:
                assert np.array_equal(composite_over(cb, table[:, index], alpha, mode, opaque=True),
                                      ref), mode

def test_composite_layers_folds_in_order():
    a = np.full((2, 3), 0.5, np.float32)
    one = np.ones((2, 3), np.float32)
    # white, then multiply 0.5 grey at full alpha -> 0.5, then normal black at 0.5 -> 0.25
    out = composite_layers([1.0, 1.0, 1.0], [(np.full(3, 0.5), one, "multiply"),
                                             (np.zeros(3), a, "normal")])
    assert out.shape == (3, 2, 3)
    np.testing.assert_allclose(out, 0.25, atol=1e-7)
    np.testing.assert_allclose(composite_layers(planes([1, 1, 1], (2, 3)), []), 1.0)
    with pytest.raises(ValueError):
        composite_layers([1.0, 1.0, 1.0], [])


def test_bad_mode_message():
    with pytest.raises(StyleError) as err:
        blend_mode("overlayy", 'layer "coast": blend')
    assert str(err.value) == ('layer "coast": blend: \'overlayy\' is not a blend mode; '
                              "one of: normal, multiply, screen, overlay, soft-light")
    with pytest.raises(StyleError, match="is not a blend mode"):
        composite_over(planes([0] * 3), planes([0] * 3), np.ones((4, 5)), "darken")
    assert blend_mode("multiply", "x") is comp.multiply


@pytest.mark.parametrize("strip", [7, 1 << 15])
def test_composite_palette_counts_the_region_like_bincount(monkeypatch, strip):
    # the histogram composite_palette adds while it looks the strips up must be numpy's
    # np.bincount of the region's indices (numpy as the reference), for a core inside a margin,
    # strips cutting the core's first and last rows, and the whole array
    monkeypatch.setattr(comp, "STRIP_PIXELS", strip)
    rng = np.random.default_rng(11)
    table = rng.random((3, 300), dtype=np.float32)
    index = rng.integers(0, 300, (37, 11)).astype(np.uint16)
    alpha = np.ones((37, 11), np.float32)
    for region in ((slice(3, 34), slice(2, 9)), (slice(0, 37), slice(0, 11)),
                   (slice(5, 6), slice(0, 4)), None):
        counts = np.zeros(300, np.intp)
        composite_palette(rng.random((3, 37, 11), dtype=np.float32), table, index, alpha,
                          opaque=True, counts=counts, region=region)
        ref = np.bincount(index[region if region is not None else ...].ravel(), minlength=300)
        assert np.array_equal(counts, ref), region
