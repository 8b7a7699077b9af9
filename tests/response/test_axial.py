"""Axial responses: Legendre series and tabulated CSV responses."""

import numpy as np
import pytest
from scipy.special import eval_legendre

from renderer.errors import MagretinaError
from renderer.response import Legendre, Tabulated


def test_legendre_matches_scipy():
    """Σ c_l P_l(x) against scipy.special.eval_legendre (reference implementation)."""
    c = [0.3, 0.0, -0.2, 0.0, 0.05, 0.0, 0.01]
    x = np.linspace(-1, 1, 101)
    ref = sum(ci * eval_legendre(l, x) for l, ci in enumerate(c))
    assert np.allclose(Legendre(c)(x), ref, atol=1e-14)
    assert Legendre(c).is_even and not Legendre([0, 1]).is_even


def test_lut_interpolation_error_bound():
    """Linear interpolation on 4097 nodes errs by ≤ h²/8·max|f''| (textbook bound)."""
    from renderer.kernels import lut_lookup_numpy

    r = Legendre([0.7, 0, 0.1, 0, -0.03])
    x = np.random.default_rng(0).uniform(-1, 1, 10000)
    h = 2.0 / 4096
    f2 = np.max(np.abs(np.polynomial.legendre.legval(np.linspace(-1, 1, 2001),
                                                     np.polynomial.legendre.legder(r.coeffs, 2))))
    assert np.max(np.abs(lut_lookup_numpy(r.lut(), x) - r(x))) <= h * h / 8 * f2 * 1.01


def test_tabulated_reproduces_smooth_function(tmp_path):
    th = np.arange(0, 181, 5.0)
    f = 0.6 + 0.1 * np.cos(np.radians(th)) ** 2
    p = tmp_path / "r.csv"
    p.write_text("theta_deg,value\n" + "\n".join(f"{a},{b}" for a, b in zip(th, f)))
    r = Tabulated.from_csv(p)
    x = np.linspace(-1, 1, 501)
    assert np.max(np.abs(r(x) - (0.6 + 0.1 * x ** 2))) < 2e-5


def test_tabulated_half_range_is_mirrored(tmp_path):
    p = tmp_path / "half.csv"
    p.write_text("# theta, value\n0,1.0\n30,0.9\n60,0.7\n90,0.6\n")
    r = Tabulated.from_csv(p)
    assert np.isclose(r(np.cos(np.radians(150.0))), r(np.cos(np.radians(30.0))))
    assert np.isclose(r(1.0), 1.0) and np.isclose(r(-1.0), 1.0)


@pytest.mark.parametrize("body, needle", [
    ("0,1\n30,2\n20,3\n90,1\n", "increase strictly"),
    ("5,1\n30,2\n90,1\n", "first angle must be 0"),
    ("0,1\n30,2\n100,1\n", "90 \\(mirrored\\) or 180"),
    ("0,1\n", "at least 3 rows"),
    ("0,1\n30,x\n90,2\n", "not numbers"),
])
def test_tabulated_bad_files(tmp_path, body, needle):
    p = tmp_path / "bad.csv"
    p.write_text(body)
    with pytest.raises(MagretinaError, match=needle) as e:
        Tabulated.from_csv(p)
    assert "bad.csv" in str(e.value)


def test_missing_file():
    with pytest.raises(MagretinaError, match="cannot read"):
        Tabulated.from_csv("/nonexistent/table.csv")
