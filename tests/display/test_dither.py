"""Sub-step contrast by dithering (noisy-bit and ordered) on a display model.

References: Allard & Faubert 2008 (Behav. Res. Methods 40:735): adding uniform noise of
one code step before quantising makes the expected displayed value equal the continuous
target; Bayer 1973 (IEEE ICC 26:11-15) for the ordered threshold matrix.  The sinusoid
is fitted by linear least squares (a + b·sin + c·cos, common practice); tolerances
follow from the binomial standard error of the dither as stated in each test.
"""

import numpy as np
import pytest

from renderer.display import make_display
from renderer.dither import bayer_matrix, frame_seed, quantise


def test_bayer_matrix_is_a_permutation():
    """The 16 × 16 Bayer matrix holds each index 0..255 once; its 2 × 2 base is
    [[0, 2], [3, 1]] (Bayer 1973)."""
    m = bayer_matrix(16)
    assert sorted(m.ravel()) == list(range(256))
    np.testing.assert_array_equal(bayer_matrix(2), [[0, 2], [3, 1]])


def _between(d, k, p):
    """Relative value whose luminance is a fraction p of the way from code k to k + 1."""
    L = d.black_cd_m2 + d.lut.sum(axis=0)
    return float(d.to_relative(L[k] + p * (L[k + 1] - L[k]))), L[k + 1] - L[k]


@pytest.mark.parametrize("kind", ["srgb", "gamma"])
def test_uniform_target_between_codes_mean_equals_target(kind):
    """A uniform patch 30 % of the way (in luminance) from code 100 to 101: the noisy-bit
    patch's mean luminance equals the target within 3 binomial standard errors
    ΔL·sqrt(p(1 − p)/N) (a 3-sigma bound: a correct method fails it for 0.3 % of seeds);
    plain rounding is off by 0.3 ΔL, far outside that bound."""
    d = make_display(kind, gamma=2.2 if kind == "gamma" else None)
    v, dL = _between(d, 100, 0.3)
    lin = np.full((512, 512, 3), v)
    target = float(d.intended_luminance(lin[:1, :1])[0, 0])
    N = 512 * 512
    se = dL * np.sqrt(0.3 * 0.7 / N)
    for seed in (0, 1, 2):
        shown = d.displayed_luminance(quantise(d, lin, "noise", seed=seed)).mean()
        assert abs(shown - target) <= 3 * se
    plain = d.displayed_luminance(quantise(d, lin, "none")).mean()
    assert abs(plain - target) > 100 * se


def test_ordered_mean_exact_to_a_block():
    """Ordered dithering: every 16 × 16 block shows the target's fraction to within 1/256 of
    a step (the Bayer thresholds are (k + 0.5)/256, each once per block)."""
    d = make_display()
    v, dL = _between(d, 60, 0.37)
    lin = np.full((64, 64, 3), v)
    L = d.displayed_luminance(quantise(d, lin, "ordered", seed=5))
    target = float(d.intended_luminance(lin[:1, :1])[0, 0])
    blocks = L.reshape(4, 16, 4, 16).mean(axis=(1, 3))
    assert np.all(np.abs(blocks - target) <= dL / 256 + 1e-9)


def _fit(y, phase):
    X = np.stack([np.ones_like(phase), np.sin(phase), np.cos(phase)], axis=1)
    a, b, c = np.linalg.lstsq(X, y, rcond=None)[0]
    return a, np.hypot(b, c), np.arctan2(c, b)


def test_half_percent_sinusoid_keeps_amplitude_and_phase():
    """L = L0·(1 + 0.005·sin(2πx/λ + φ)) on an 8-bit sRGB display, L0 exactly the luminance
    of code 118 (a 0.5 % modulation is about a third of a step there).  Noisy-bit: the
    fitted amplitude is within 5 % and the phase within 0.05 rad (the fit's standard error
    is about 0.5 % and 0.005 rad for 256 × 1024 pixels of at most one step of noise).
    Plain rounding keeps every pixel at code 118: the modulation is lost."""
    d = make_display()
    L = d.black_cd_m2 + d.lut.sum(axis=0)
    L0 = L[118]
    assert 0.005 * L0 < 0.5 * (L[119] - L[118])  # sub-step modulation
    H, W, lam, phi = 256, 1024, 64.0, 0.7
    x = np.arange(W, dtype=np.float64)
    ph = 2 * np.pi * x / lam + phi
    target = L0 * (1 + 0.005 * np.sin(ph))
    lin = np.repeat(np.repeat(d.to_relative(target)[None, :, None], H, 0), 3, 2)
    for method, ok in (("noise", True), ("none", False)):
        shown = d.displayed_luminance(quantise(d, lin, method, seed=11)).mean(axis=0)
        a, amp, p = _fit(shown, 2 * np.pi * x / lam)
        want_p = np.arctan2(np.sin(phi), np.cos(phi))
        good = abs(amp / (0.005 * L0) - 1) <= 0.05 and abs(np.angle(np.exp(1j * (p - want_p)))) <= 0.05
        assert good == ok, (method, amp / (0.005 * L0), p, want_p)


def test_bitwise_reproducible_for_a_seed():
    """Same seed, same codes bit for bit; another seed or (temporal) frame differs; fixed
    noise repeats across frames."""
    d = make_display(bits=10)
    rng = np.random.default_rng(0)
    lin = rng.random((32, 48, 3))
    for method in ("noise", "ordered"):
        a = quantise(d, lin, method, seed=frame_seed(7, 3))
        b = quantise(d, lin, method, seed=frame_seed(7, 3))
        assert a.dtype == np.uint16 and a.max() <= 1023
        np.testing.assert_array_equal(a, b)
        assert not np.array_equal(a, quantise(d, lin, method, seed=frame_seed(8, 3)))
        assert not np.array_equal(a, quantise(d, lin, method, seed=frame_seed(7, 4)))
        np.testing.assert_array_equal(quantise(d, lin, method, seed=frame_seed(7, 3, temporal=False)),
                                      quantise(d, lin, method, seed=frame_seed(7, 9, temporal=False)))


def test_grey_stays_grey():
    """One threshold per pixel for all channels: a grey input gives R = G = B codes."""
    d = make_display()
    lin = np.repeat(np.linspace(0.1, 0.2, 64 * 64).reshape(64, 64, 1), 3, axis=2)
    q = quantise(d, lin, "noise", seed=3)
    assert np.array_equal(q[..., 0], q[..., 1]) and np.array_equal(q[..., 1], q[..., 2])


@pytest.mark.parametrize("method", ["none", "noise", "ordered"])
def test_one_channel_of_grey_equals_three(method):
    """Displays whose channels share one curve give a grey image the same codes whether it
    is quantised as one channel or three (the shortcut the display metrics take)."""
    lin = np.repeat(np.linspace(0.0, 1.0, 40 * 50).reshape(40, 50, 1), 3, axis=2)
    for d in (make_display(), make_display("gamma", bits=10, gamma=1.8)):
        assert d.channels_alike
        three = quantise(d, lin, method, seed=frame_seed(2, 1))
        one = quantise(d, lin[..., :1], method, seed=frame_seed(2, 1))
        np.testing.assert_array_equal(np.repeat(one, 3, axis=2), three)
