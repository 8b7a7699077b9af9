"""sRGB transfer functions (IEC 61966-2-1) and mean-preserving luminance modulation."""

import numpy as np

import renderer
from renderer.composite import (from_uint8_srgb, linear_to_srgb, srgb_to_linear, to_uint8_srgb,
                                to_uint16_linear)
from renderer.eye import load_layout
from renderer.field import fixed
from renderer.pose import Pose
from renderer.response import Legendre
from renderer.scene import uniform
from renderer.views import HeadPanorama, WorldPanorama


def test_breakpoints_and_segments():
    """IEC 61966-2-1: decode V/12.92 for V ≤ 0.04045 else ((V+0.055)/1.055)^2.4; encode
    12.92 L for L ≤ 0.0031308 else 1.055 L^(1/2.4) − 0.055.  The two pieces meet at
    the breakpoints to within 1e-7 (the standard's rounding)."""
    assert np.isclose(srgb_to_linear(0.04045), 0.04045 / 12.92)
    assert abs(((0.04045 + 0.055) / 1.055) ** 2.4 - 0.04045 / 12.92) < 1e-7
    assert np.isclose(linear_to_srgb(0.0031308), 12.92 * 0.0031308)
    assert abs(1.055 * 0.0031308 ** (1 / 2.4) - 0.055 - 12.92 * 0.0031308) < 1e-7
    assert np.isclose(srgb_to_linear(1.0), 1.0) and srgb_to_linear(0.0) == 0.0
    # Mid-grey code value 0.5 decodes to 0.2140 linear (IEC 61966-2-1 formula; common practice).
    assert abs(srgb_to_linear(0.5) - 0.21404) < 1e-5
    assert np.isclose(srgb_to_linear(0.02), 0.02 / 12.92)
    assert np.isclose(srgb_to_linear(0.8), ((0.8 + 0.055) / 1.055) ** 2.4)


def test_round_trips():
    v = np.linspace(0, 1, 10001)
    assert np.allclose(linear_to_srgb(srgb_to_linear(v)), v, atol=1e-12)
    codes = np.arange(256, dtype=np.uint8)
    assert np.array_equal(to_uint8_srgb(from_uint8_srgb(codes)), codes)


def test_png16_linear_round_trip(tmp_path):
    """16-bit linear PNGs round-trip exactly through imageio (REFERENCES: checked)."""
    from renderer.io import read_image_linear, write_png16_linear

    rng = np.random.default_rng(0)
    img = rng.random((16, 32, 3)).astype(np.float32)
    write_png16_linear(tmp_path / "a.png", img)
    back = read_image_linear(tmp_path / "a.png")
    assert np.array_equal(to_uint16_linear(back), to_uint16_linear(img))


def test_modulation_is_mean_preserving():
    """On a uniform scene the solid-angle-weighted mean luminance over the seen field is
    the scene's luminance: the modulation gain·(s/⟨s⟩ − 1) averages to zero."""
    f = fixed(48.0, 64.0, 2.0)
    layout = load_layout("lateral")
    resp = Legendre([0.7, 0.0, 0.08])
    view = HeadPanorama(720)
    img = renderer.render(f, Pose(25.0), layout, resp, view, scene=uniform(720, 0.4), gain=1.0,
                          outside=0.0)
    sig = renderer.render_pattern(f, Pose(25.0), layout, resp, view)
    seen = ~np.isnan(sig)
    w = view.solid_angle()
    lum = img[..., 1].astype(np.float64)
    # ⟨s⟩ comes from the 360-wide head grid, the check integrates on this 720-wide view:
    # two midpoint quadratures of one integral, measured within 3.5e-5 (relative) of
    # each other (renderer.pipeline.MEAN_GRID_WIDTH), so 0.4·5e-5 = 2e-5 here.
    assert abs(np.sum(lum[seen] * w[seen]) / np.sum(w[seen]) - 0.4) < 2e-5
    assert np.all(lum[~seen] == 0.0)


def test_modulation_is_multiplicative_in_linear_light():
    """Each channel is multiplied by the same factor 1 + m (chromaticity kept)."""
    f = fixed(48.0, 64.0, 2.0)
    layout = load_layout("all-around")
    resp = Legendre([0.7, 0.0, 0.08])
    view = WorldPanorama(64)
    scene = uniform(64, 0.3)
    scene.image[..., 0] = 0.1
    out = renderer.render(f, Pose(), layout, resp, view, scene=scene, gain=0.5)
    sig, mean = renderer.render_signal(f, Pose(), layout, resp, view)
    k = 1 + 0.5 * (sig / mean - 1)
    assert np.allclose(out[..., 0], 0.1 * k, atol=1e-6)
    assert np.allclose(out[..., 1], 0.3 * k, atol=1e-6)
