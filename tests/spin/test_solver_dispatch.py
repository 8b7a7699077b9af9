"""The solver registry: the spectral-convolution solver is reachable through singlet_yield."""

import numpy as np

from renderer.spin import singlet_yield
from renderer.spin.definition import load_pair
from renderer.spin.solvers import choose_method

from conftest import random_fields, random_pair


def test_spectral_through_singlet_yield_within_its_bound(rng):
    """method='spectral' agrees with the exact separable sum (Lee et al. 2014, J. R. Soc.
    Interface, suppl. §1) to its stated error bound of 1e-6."""
    pair = random_pair(rng, spins_a=(1.0, 0.5), spins_b=(0.5, 0.5))
    b = random_fields(rng, 5)
    exact = singlet_yield(pair, b, method="separable")
    fast = singlet_yield(pair, b, method="spectral")
    assert np.max(np.abs(exact - fast)) < 1e-6


def test_auto_prefers_spectral_only_for_large_separable_pairs():
    assert choose_method(load_pair("fad-trp-n5-n1")) == "separable"
    assert choose_method(load_pair("fad-trp-7plus7")) == "spectral"
