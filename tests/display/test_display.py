"""Display models: transfer curves, measured tables and their inverse.

References: IEC 61966-2-1 (sRGB transfer and the Y row of its primaries), as
implemented independently by colour-science (``colour.models.eotf_sRGB``,
``colour.gamma_function``, ``RGB_COLOURSPACE_sRGB``); Fritsch & Carlson 1980 (SIAM J.
Numer. Anal. 17:238): a monotone piecewise-cubic interpolant of monotone data stays
between the node values on every interval.
"""

import numpy as np
import pytest

from renderer.display import contrast_stats, make_display, parse_target
from renderer.errors import MagretinaError


def test_srgb_lut_matches_colour_science():
    """Each code's luminance: black + (white − black)·EOTF_sRGB(code/255) weighted by the
    sRGB primaries' Y row (IEC 61966-2-1, via colour-science)."""
    colour = pytest.importorskip("colour")
    d = make_display("srgb", bits=8, black_cd_m2=0.5, white_cd_m2=100.0)
    x = np.arange(256) / 255.0
    y = colour.models.RGB_COLOURSPACE_sRGB.matrix_RGB_to_XYZ[1]
    ref = 99.5 * y[:, None] * colour.models.eotf_sRGB(x)[None, :]
    np.testing.assert_allclose(d.lut, ref, rtol=1e-12, atol=1e-12)
    grey = np.repeat(np.arange(256)[:, None], 3, axis=1)
    np.testing.assert_allclose(d.displayed_luminance(grey), 0.5 + 99.5 * colour.models.eotf_sRGB(x),
                               rtol=1e-12)


def test_gamma_lut_matches_colour_science():
    """Power law L = black + (white − black)·(code/max)^γ (colour.gamma_function)."""
    colour = pytest.importorskip("colour")
    d = make_display("gamma", bits=10, gamma=2.4, black_cd_m2=0.0, white_cd_m2=120.0)
    x = np.arange(1024) / 1023.0
    np.testing.assert_allclose(d.lut.sum(axis=0), 120.0 * colour.gamma_function(x, 2.4),
                               rtol=1e-12, atol=1e-12)
    # Inverse: the exact code of a node luminance is that node.
    lin = colour.gamma_function(np.array([0.0, 100 / 1023, 1.0]), 2.4)
    np.testing.assert_allclose(d.continuous_code(lin), [0, 100, 1023], atol=1e-9)


def test_srgb_rounding_is_the_historical_8bit_output():
    """Rounding on the default display gives exactly composite.to_uint8_srgb (IEC 61966-2-1
    encoding, round half to even): default outputs keep their pixels."""
    from renderer.composite import to_uint8_srgb
    from renderer.dither import quantise

    rng = np.random.default_rng(1)
    lin = rng.random((40, 50, 3)).astype(np.float32)
    np.testing.assert_array_equal(quantise(make_display(), lin, "none"), to_uint8_srgb(lin))


def _write(tmp_path, text, name="table.csv"):
    p = tmp_path / name
    p.write_text(text)
    return str(p)


def test_grey_table_interpolates_monotonically(tmp_path):
    """A table of 17 nodes of L = 0.3 + 99.7·(k/255)^2.2: the interpolant passes through the
    nodes and on every interval stays between the node values (Fritsch & Carlson 1980); the
    inverse maps a node's luminance back to its code."""
    nodes = np.r_[np.arange(0, 256, 16), 255]
    lum = 0.3 + 99.7 * (nodes / 255.0) ** 2.2
    text = "code,cd_m2\n" + "".join(f"{k},{v!r}\n" for k, v in zip(nodes, lum))
    d = make_display("table", bits=8, table=_write(tmp_path, text))
    L = d.black_cd_m2 + d.lut.sum(axis=0)
    assert d.black_cd_m2 == pytest.approx(0.3) and d.white_cd_m2 == pytest.approx(100.0)
    np.testing.assert_allclose(L[nodes], lum, rtol=1e-12)
    for a, b in zip(nodes[:-1], nodes[1:]):
        seg = L[a:b + 1]
        assert np.all(np.diff(seg) >= 0)
        assert seg.min() >= lum[nodes == a][0] - 1e-12 and seg.max() <= lum[nodes == b][0] + 1e-12
    v = d.to_relative(lum[5])
    assert d.linear_code(np.full(3, v)) == pytest.approx([nodes[5]] * 3, abs=1e-9)


def test_rgb_table_sums_channels(tmp_path):
    """Per-channel table: white = black + the three channels' contributions at full code
    (additivity of the channels, common practice of display calibration)."""
    rows = "".join(f"{k},{0.2 + 20 * (k / 255) ** 2},{0.2 + 70 * (k / 255) ** 2},"
                   f"{0.2 + 9 * (k / 255) ** 2}\n" for k in (0, 64, 128, 192, 255))
    d = make_display("table", table=_write(tmp_path, "code,red_cd_m2,green_cd_m2,blue_cd_m2\n" + rows))
    assert d.black_cd_m2 == pytest.approx(0.2)
    assert d.white_cd_m2 == pytest.approx(0.2 + 99.0)
    np.testing.assert_allclose(d.displayed_luminance(np.array([[255, 0, 0]])), [20.2])


@pytest.mark.parametrize("text, needle", [
    ("code,cd_m2\n0,0.1\n128,20\n100,30\n255,90\n", "line 4: code 100 does not increase"),
    ("code,cd_m2\n0,0.1\n128,20\n200,19\n255,90\n", "line 4: cd_m2 = 19 is not above"),
    ("code,cd_m2\n0,0.1\n255,90\n", "2 data rows; need at least 3"),
    ("code,lum\n0,0.1\n128,20\n255,90\n", "line 1: header"),
    ("code,cd_m2\n0,0.1\n128,20\n250,90\n", "must start at 0 and end at 255"),
    ("code,cd_m2\n0,0.1\n128,x\n255,90\n", "line 3"),
])
def test_bad_tables_are_refused_naming_the_row(tmp_path, text, needle):
    """Non-monotone, short or malformed tables are refused with the file and row named."""
    p = _write(tmp_path, text)
    with pytest.raises(MagretinaError) as exc:
        make_display("table", table=p)
    assert needle in str(exc.value) and p in str(exc.value)


def test_bad_display_keys():
    with pytest.raises(MagretinaError, match="bits = 12: allowed 8, 10, 16"):
        make_display(bits=12)
    with pytest.raises(MagretinaError, match="gamma: missing"):
        make_display("gamma")
    with pytest.raises(MagretinaError, match="must exceed black"):
        make_display(black_cd_m2=50.0, white_cd_m2=40.0)


def test_targets_in_cd_and_fraction_of_white():
    """L = black + v·(white − black): 40 cd/m² on a 0..80 display is v = 0.5; '0.25 white'
    is 20 cd/m²."""
    d = make_display(black_cd_m2=0.0, white_cd_m2=80.0)
    assert parse_target("40 cd/m2", d) == pytest.approx(0.5)
    assert parse_target("0.25 white", d) == pytest.approx(0.25)
    d2 = make_display(black_cd_m2=10.0, white_cd_m2=90.0)
    assert parse_target("50 cd/m2", d2) == pytest.approx(0.5)
    with pytest.raises(MagretinaError, match="shows 10..90"):
        parse_target("5 cd/m2", d2, where="--grey")


def test_contrast_definitions():
    """Michelson (max − min)/(max + min) and RMS σ/μ (Peli 1990) of a two-level image: levels
    40 and 60 give Michelson 0.2 and RMS 0.2."""
    lum = np.array([[40.0, 60.0], [60.0, 40.0]])
    s = contrast_stats(lum)
    assert s["mean_cd_m2"] == 50.0
    assert s["michelson"] == pytest.approx(0.2) and s["rms_contrast"] == pytest.approx(0.2)
