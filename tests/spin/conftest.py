"""Shared helpers for the spin-dynamics tests: small random radical pairs."""

import numpy as np
import pytest

from renderer.spin import SOLVERS, Nucleus, Radical, RadicalPair, yields


def random_tensor(rng, scale_mT=0.5):
    """A random symmetric (anisotropic) hyperfine tensor in mT."""
    a = rng.normal(size=(3, 3)) * scale_mT
    return 0.5 * (a + a.T)


def random_pair(rng, spins_a=(0.5,), spins_b=(0.5,), k_s=1e6, k_t=1e6, scale_mT=0.5, **kw):
    """A radical pair with random anisotropic tensors on the given nuclear spins."""
    a = Radical([Nucleus(s, random_tensor(rng, scale_mT), name=f"a{i}") for i, s in enumerate(spins_a)])
    b = Radical([Nucleus(s, random_tensor(rng, scale_mT), name=f"b{i}") for i, s in enumerate(spins_b)])
    return RadicalPair(a, b, k_s=k_s, k_t=k_t, **kw)


def random_fields(rng, n, magnitude_T=50e-6):
    d = rng.normal(size=(n, 3))
    return magnitude_T * d / np.linalg.norm(d, axis=1, keepdims=True)


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


def all_methods(pair, fields):
    """Yields from every *exact* solver that applies.  The spectral-convolution solver
    (renderer.spin.large) carries a stated error bound instead and is checked against
    the exact solvers within that bound in test_large.py and test_solver_dispatch.py."""
    out = {}
    for name, mod in SOLVERS.items():
        if getattr(mod, "DEFAULT_TOL", 0.0) > 0.0:
            continue
        if mod.applicable(pair)[0]:
            out[name] = yields(pair, fields, method=name)
    return out
