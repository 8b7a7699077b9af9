"""Every registered response kind, built the way a study file builds it.

The kinds come from ``renderer.response.REGISTRY``; ``EXAMPLES`` must name one setting per
kind, so a new kind fails here until it has one, and then runs every check below.
"""

import numpy as np
import pytest

from renderer.response import REGISTRY
from renderer.study.build import build_response

#: One study-file setting per registered kind (invented numbers, shape only).
EXAMPLES = {
    "legendre": {"coeffs": [0.6, 0.05, 0.2]},
    "tabulated": {"theta_deg": [0.0, 30.0, 60.0, 90.0], "values": [0.8, 0.7, 0.55, 0.5]},
    "harmonic": {"coeffs": [1.2, 0.0, 0.15, 0.0]},
    "spin-table": {"coeffs": [1.1, 0.0, 0.0, 0.0, 0.0, 0.0, -0.05, 0.0, 0.02]},
}

Y00 = 0.5 / np.sqrt(np.pi)           # 1/(2√π): DLMF 14.30 normalisation (common practice)
Y10_Z = np.sqrt(3.0 / (4.0 * np.pi))  # Y_10 = √(3/4π) z
Y20_Z = np.sqrt(5.0 / (16.0 * np.pi))  # Y_20 = √(5/16π) (3z² − 1)
Y22_XY = 0.25 * np.sqrt(15.0 / np.pi)  # real Y_22 = ¼√(15/π) (x² − y²) (even m: no phase question)


def _dirs(n=200, seed=11):
    d = np.random.default_rng(seed).normal(size=(n, 3))
    return d / np.linalg.norm(d, axis=1, keepdims=True)


def test_every_registered_kind_has_an_example():
    assert set(EXAMPLES) == set(REGISTRY)


def _reference(kind, cfg, d):
    """The response at unit directions d (molecular frame, z the receptor axis), computed
    outside the class: NumPy's Legendre series, the clamped cubic spline through the samples
    (scipy), or the handbook forms of the m = 0 real harmonics."""
    z = d[:, 2]
    if kind == "legendre":
        return np.polynomial.legendre.legval(z, cfg["coeffs"])
    if kind == "tabulated":
        from scipy.interpolate import CubicSpline
        th = np.asarray(cfg["theta_deg"])
        th = np.concatenate([th, 180.0 - th[-2::-1]])
        v = np.asarray(cfg["values"])
        v = np.concatenate([v, v[-2::-1]])
        spl = CubicSpline(np.radians(th), v, bc_type=((1, 0.0), (1, 0.0)))
        return spl(np.arccos(np.clip(z, -1.0, 1.0)))
    c = np.asarray(cfg["coeffs"])  # flat order l² + l + m: index 0 = (0,0), 2 = (1,0), 6 = (2,0), 8 = (2,2)
    out = c[0] * Y00 + c[2] * Y10_Z * z
    if c.size > 6:
        out = out + c[6] * Y20_Z * (3 * z ** 2 - 1) + c[8] * Y22_XY * (d[:, 0] ** 2 - d[:, 1] ** 2)
    return out


@pytest.mark.parametrize("kind", sorted(REGISTRY))
def test_registered_kind_builds_from_a_study_setting_and_evaluates(kind):
    cfg = EXAMPLES[kind]
    resp = build_response({"kind": kind, **cfg}, base_dir=".")
    assert isinstance(resp, REGISTRY[kind])
    d = _dirs()
    got = resp.evaluate_dirs(d)
    np.testing.assert_allclose(np.asarray(got, float), _reference(kind, cfg, d), rtol=0, atol=1e-12)
