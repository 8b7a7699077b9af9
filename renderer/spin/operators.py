"""Spin operators for any spin quantum number, and their embedding in product spaces.

This module is the lowest layer of :mod:`renderer.spin`: dense complex matrices for
single spins (S = 1/2, 1, 3/2, ...) in the |S, m⟩ basis ordered m = S, S−1, ..., −S
(common practice), Kronecker products of lists of them, and placing a single-spin
operator into a multi-spin space.  It knows nothing about radicals, fields or rates
(see :mod:`renderer.spin.system` and :mod:`renderer.spin.hamiltonian`).

All operators are dimensionless (units of ħ) and complex128.
"""

from __future__ import annotations

from functools import lru_cache, reduce

import numpy as np

from ..errors import MagretinaError


def check_spin(s, name="spin") -> float:
    """Return ``s`` as float if it is a positive multiple of 1/2, else raise.

    Parameters
    ----------
    s : float
        Spin quantum number (0.5, 1, 1.5, ...).
    name : str
        How the value is named in the error message.
    """
    try:
        v = float(s)
    except (TypeError, ValueError):
        raise MagretinaError(f"{name} must be a number (a multiple of 1/2), got {s!r}") from None
    if not np.isfinite(v) or v <= 0 or abs(2 * v - round(2 * v)) > 1e-12:
        raise MagretinaError(f"{name} = {s!r} is not allowed; a spin quantum number must be a "
                             f"positive multiple of 1/2 (0.5, 1, 1.5, ...)")
    return round(2 * v) / 2


def multiplicity(s) -> int:
    """2s + 1 for a spin quantum number ``s``."""
    return int(round(2 * check_spin(s))) + 1


@lru_cache(maxsize=64)
def _spin_matrices_cached(two_s: int):
    s = two_s / 2
    m = s - np.arange(two_s + 1)  # m = s, s-1, ..., -s
    # <m+1|S+|m> = sqrt(s(s+1) - m(m+1)); S+ raises m, i.e. moves one row up
    sp = np.diag(np.sqrt(s * (s + 1) - m[1:] * (m[1:] + 1)), k=1).astype(np.complex128)
    sx = 0.5 * (sp + sp.conj().T)
    sy = -0.5j * (sp - sp.conj().T)
    sz = np.diag(m).astype(np.complex128)
    for a in (sx, sy, sz):
        a.setflags(write=False)
    return sx, sy, sz


def spin_matrices(s):
    """Cartesian spin operators (S_x, S_y, S_z) of one spin ``s``.

    Parameters
    ----------
    s : float
        Spin quantum number, a positive multiple of 1/2.

    Returns
    -------
    tuple of ndarray
        Three read-only complex128 arrays of shape (2s+1, 2s+1), basis |s, m⟩ with
        m = s, s−1, ..., −s.  They satisfy [S_x, S_y] = i S_z and S² = s(s+1).
    """
    return _spin_matrices_cached(int(round(2 * check_spin(s))))


def kron_all(mats):
    """Kronecker product of a list of square matrices, first factor slowest.

    ``kron_all([a, b, c]) = a ⊗ b ⊗ c``; an empty list gives the 1×1 identity.
    """
    mats = list(mats)
    if not mats:
        return np.ones((1, 1), dtype=np.complex128)
    return reduce(np.kron, mats)


def embed(op, index, dims):
    """Place a single-spin operator at position ``index`` of a product space.

    Parameters
    ----------
    op : ndarray, shape (dims[index], dims[index])
        The single-spin operator.
    index : int
        Which factor of the product it acts on (0 = slowest-varying).
    dims : sequence of int
        Dimensions of all factors, in Kronecker order.

    Returns
    -------
    ndarray, shape (prod(dims), prod(dims)), complex128
        I ⊗ ... ⊗ op ⊗ ... ⊗ I.
    """
    dims = [int(d) for d in dims]
    op = np.asarray(op, dtype=np.complex128)
    if op.shape != (dims[index], dims[index]):
        raise ValueError(f"operator shape {op.shape} does not match factor {index} of dimension "
                         f"{dims[index]}")
    left = int(np.prod(dims[:index], dtype=np.int64))
    right = int(np.prod(dims[index + 1:], dtype=np.int64))
    return np.kron(np.kron(np.eye(left, dtype=np.complex128), op), np.eye(right, dtype=np.complex128))


def embed_vector(s, index, dims):
    """The three Cartesian operators of spin ``s`` at position ``index``: array (3, D, D)."""
    return np.stack([embed(a, index, dims) for a in spin_matrices(s)])


def singlet_projector():
    """P_S = 1/4 − S_1·S_2 for two spin-1/2 particles, shape (4, 4), basis |m1 m2⟩."""
    s = spin_matrices(0.5)
    return 0.25 * np.eye(4, dtype=np.complex128) - sum(np.kron(a, a) for a in s)
