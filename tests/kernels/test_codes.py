"""Display codes by threshold tables (renderer.kernels.codes) against the transfer function.

The reference is :func:`renderer.dither.quantise_reference`, which evaluates the display's
transfer in NumPy (the IEC 61966-2-1 sRGB encoding, or a power law) and rounds; the
tables must give the same codes bit for bit, so every comparison here is exact.  The
thresholds themselves are checked against the inverse transfer written out from the
standard (IEC 61966-2-1: L = V/12.92 for V <= 0.04045, else ((V + 0.055)/1.055)^2.4).
"""

import math

import numpy as np
import pytest

from renderer.display import THRESHOLD_BITS, make_display
from renderer.dither import frame_seed, quantise, quantise_reference

DISPLAYS = [("srgb", 8, None), ("srgb", 10, None), ("gamma", 8, 2.2), ("gamma", 10, 0.6)]


def _display(kind, bits, gamma):
    return make_display(kind, bits, gamma=gamma)


def _near_thresholds(d, mode, width=1024):
    """Every float32 within ``width`` steps of a threshold (where a code changes)."""
    thr = d.code_thresholds(mode).thr
    t = thr[1:-1][np.isfinite(thr[1:-1])]
    bits = t.view(np.uint32).astype(np.int64)[:, None] + np.arange(-width, width + 1)[None, :]
    bits = np.clip(bits, 0, 0x3F800000).astype(np.uint32)
    return np.unique(bits).view(np.float32)


def _hostile(rng):
    """Random values over [-0.5, 1.5] and dark values, with the edges of the clip."""
    img = rng.uniform(-0.5, 1.5, size=(64, 96, 3)).astype(np.float32)
    img[1] = (rng.random((96, 3)) ** 12).astype(np.float32)
    img[0, :9, 0] = [-1.0, 2.0, 0.0, 1.0, 1e-38, -0.0, np.inf, -np.inf, 1e-45]
    return img


@pytest.mark.parametrize("kind,bits,gamma", DISPLAYS)
def test_rounded_codes_equal_the_transfer_at_every_step(kind, bits, gamma):
    """Plain rounding: the table's codes equal the transfer's at the 2049 float32 values
    around every code step and on random values including the clip edges."""
    d = _display(kind, bits, gamma)
    x = _near_thresholds(d, "round")
    img = np.resize(x, (1, x.size // 3, 3))
    np.testing.assert_array_equal(quantise(d, img), quantise_reference(d, img))
    img = _hostile(np.random.default_rng(bits))
    np.testing.assert_array_equal(quantise(d, img), quantise_reference(d, img))


@pytest.mark.parametrize("kind,bits,gamma", DISPLAYS)
@pytest.mark.parametrize("method", ["noise", "ordered"])
def test_dithered_codes_equal_the_reference(kind, bits, gamma, method):
    """Dithering: the integer part of the code position comes from a table, the step
    fraction and the threshold are the reference's float64 operations: equal codes, on
    values around every step and on random values, 3-channel and 1-channel images."""
    d = _display(kind, bits, gamma)
    x = _near_thresholds(d, "floor", width=256)
    n = x.size // 3
    img = np.resize(x, (1, n, 3))
    seed = frame_seed(7, 3)
    np.testing.assert_array_equal(quantise(d, img, method, seed),
                                  quantise_reference(d, img, method, seed))
    img = _hostile(np.random.default_rng(bits + 1))
    for a in (img, img[..., :1], img[..., 0]):
        np.testing.assert_array_equal(quantise(d, a, method, seed),
                                      quantise_reference(d, a, method, seed))


def test_nan_and_float64_take_the_reference_path():
    """NaN (which the table cannot place) and float64 input give the reference's codes."""
    d = make_display()
    img = _hostile(np.random.default_rng(0))
    img[5, 5, 1] = np.nan
    with np.errstate(invalid="ignore"):
        np.testing.assert_array_equal(quantise(d, img), quantise_reference(d, img))
    img64 = _hostile(np.random.default_rng(1)).astype(np.float64) * (1 + 1e-12)
    np.testing.assert_array_equal(quantise(d, img64), quantise_reference(d, img64))


def _srgb_decode(v):
    """IEC 61966-2-1 decoding, written out (float64)."""
    return v / 12.92 if v <= 0.04045 else ((v + 0.055) / 1.055) ** 2.4


@pytest.mark.parametrize("bits", THRESHOLD_BITS)
def test_srgb_thresholds_are_the_inverse_transfer_of_half_codes(bits):
    """A rounded sRGB code k starts where the encoding reaches k − 0.5 code steps, i.e.
    at the IEC 61966-2-1 decoding of (k − 0.5)/max: every threshold lies within two
    float32 steps of that value (the float64 transfer rounds, the threshold is a float32)."""
    d = make_display("srgb", bits)
    table = d.code_thresholds("round")
    thr, start = table.thr, table.start
    top = d.max_code
    assert thr.shape == (top + 2,) and np.isfinite(thr[1:-1]).all()
    for k in range(1, top + 1):
        want = _srgb_decode((k - 0.5) / top)
        assert abs(float(thr[k]) - want) <= 2 * math.ulp(np.float32(want).item()) * 2 ** 29, k
    # the bucket table names the code at each bucket's start; no sRGB bucket holds two
    # thresholds (the one-comparison pass is the whole answer)
    nb = start.size
    b = np.arange(nb)
    np.testing.assert_array_equal(start, np.searchsorted(thr[1:-1].astype(float), b / nb,
                                                         side="right"))
    assert table.multi is None


def test_measured_and_16_bit_displays_have_no_table(tmp_path):
    """The tables are for the analytic kinds at 8 and 10 bits; a measured table and a
    16-bit display keep the interpolating reference."""
    assert make_display("srgb", 16).code_thresholds() is None
    p = tmp_path / "grey.csv"
    p.write_text("code,cd_m2\n0,0.5\n128,20\n255,90\n")
    assert make_display("table", 8, table=str(p)).code_thresholds() is None


def test_metric_images_equal_their_numpy_expressions():
    """The display metrics' luminance images (grey pattern, intended and displayed
    luminance) from the kernels equal the NumPy expressions they replace, bit for bit,
    including NaN signals, values outside [0, 1] and the sign of −0.0."""
    from renderer.composite import pattern_grey
    from renderer.kernels import clip_unit_float64, code_luminance, grey_pattern

    rng = np.random.default_rng(5)
    sig = rng.uniform(0.2, 0.9, size=(40, 70))
    sig[3, :5] = [np.nan, 0.0, 1e9, -1.0, np.inf]
    for gain, grey in ((2.0, 0.5), (0.0, 0.3), (40.0, 0.9)):
        with np.errstate(invalid="ignore"):
            want = pattern_grey(sig, 0.55, gain, grey=grey)
        got = grey_pattern(sig, 0.55, gain, grey)
        np.testing.assert_array_equal(np.repeat(got[..., None], 3, axis=2), want)
    img = rng.uniform(-0.5, 1.5, size=(30, 20, 3)).astype(np.float32)
    img[0, 0] = [np.nan, -0.0, np.inf]
    ref = np.clip(np.asarray(img, np.float64), 0.0, 1.0)
    got = clip_unit_float64(img)
    assert np.array_equal(got, ref, equal_nan=True)
    np.testing.assert_array_equal(np.signbit(got), np.signbit(ref))  # −0.0 kept, as NumPy
    for bits in (8, 10):
        d = make_display("gamma", bits, black_cd_m2=0.7, white_cd_m2=95.0, gamma=2.3)
        codes = rng.integers(0, d.max_code + 1, size=(25, 33, 3)).astype(
            np.uint8 if bits == 8 else np.uint16)
        want = (d.black_cd_m2 + d.lut[0][codes[..., 0]] + d.lut[1][codes[..., 1]]
                + d.lut[2][codes[..., 2]])
        np.testing.assert_array_equal(code_luminance(codes, d.lut, d.black_cd_m2), want)
        np.testing.assert_array_equal(d.displayed_luminance(codes), want)
    with pytest.raises(IndexError):
        make_display("srgb", 10).displayed_luminance(np.full((2, 3), 4000, np.uint16))


def _reference_stats(d, lin, codes, mask, prefix):
    """displayed_stats written with NumPy alone (the expressions the kernel replaces)."""
    from renderer.display import contrast_stats

    out = {}
    lum_i = d.black_cd_m2 + np.clip(np.asarray(lin, np.float64), 0.0, 1.0) @ d.lut[:, -1]
    c = np.asarray(codes)
    lum_d = d.black_cd_m2 + d.lut[0][c[..., 0]] + d.lut[1][c[..., 1]] + d.lut[2][c[..., 2]]
    for tag, lum in (("intended", lum_i), ("displayed", lum_d)):
        for k, v in contrast_stats(lum, mask).items():
            out[f"{prefix}{k}_{tag}"] = v
    return out


def _same(a, b):
    assert a.keys() == b.keys()
    for k in a:
        assert (a[k] == b[k]) or (np.isnan(a[k]) and np.isnan(b[k])), (k, a[k], b[k])


@pytest.mark.parametrize("shape", [(512, 1024), (37, 91), (3, 2)])
def test_display_statistics_equal_numpy(shape):
    """displayed_stats and displayed_stats_grey by the one-pass kernel give the numbers
    NumPy gives (mean by NumPy's pairwise summation, variance, max, min), bit for bit, for
    colour frames, grey patterns with a mask, an empty mask and a NaN pixel."""
    from renderer.display import displayed_stats, displayed_stats_grey

    rng = np.random.default_rng(shape[1])
    for d in (make_display(), make_display("gamma", 10, black_cd_m2=0.4, white_cd_m2=120.0,
                                           gamma=2.4)):
        img = rng.uniform(-0.05, 1.05, size=shape + (3,)).astype(np.float32)
        codes = quantise(d, img, "noise", 3)
        _same(displayed_stats(d, img, codes, prefix="f_"),
              _reference_stats(d, img, codes, None, "f_"))
        grey = rng.uniform(0.3, 0.7, size=shape).astype(np.float32)
        gcodes = quantise(d, grey)
        for mask in (rng.random(shape) < 0.6, np.zeros(shape, bool), None):
            want = _reference_stats(d, np.repeat(grey[..., None], 3, axis=2),
                                    np.repeat(gcodes[..., None], 3, axis=2), mask, "p_")
            _same(displayed_stats_grey(d, grey, gcodes, mask=mask, prefix="p_"), want)
        img[0, 1, 2] = np.nan
        with np.errstate(invalid="ignore"):
            _same(displayed_stats(d, img, codes), _reference_stats(d, img, codes, None, ""))
