"""Choosing and running the exact singlet-yield solvers.

``SOLVERS`` maps a method name to a solver module exposing ``applicable(pair) ->
(ok, reason)`` and ``yields(pair, fields_T (K, 3), progress) -> (phi_s, phi_t)``;
adding a solver is one new module and one line here.  ``method="auto"`` picks the
cheapest exact one: ``separable`` (equal rates, no inter-radical coupling),
``eigenbasis`` (equal rates), ``liouville`` (anything).  Memory is estimated before
anything is allocated.  This module does not build tables (:mod:`renderer.response`).
"""

from __future__ import annotations

import numpy as np

from ..errors import MagretinaError
from . import eigenbasis, large, liouville, separable
from .planner import check_memory
from .system import RadicalPair

SOLVERS = {
    "separable": separable,
    "eigenbasis": eigenbasis,
    "liouville": liouville,
    "spectral": large,
}

#: Above this (dim A · dim B)², 'auto' prefers the spectral-convolution solver (error
#: bound 1e-6, see renderer.spin.large) to the direct separable sum, whose cost grows as
#: (dim A)²(dim B)² (about a minute per direction at the 7 + 7 preset's 2.2e5).
SPECTRAL_ABOVE = 1e9


def choose_method(pair: RadicalPair, method: str = "auto") -> str:
    """Resolve ``method`` ('auto' or a key of SOLVERS) for a pair; raise if it cannot apply."""
    if method == "auto":
        for name in ("separable", "eigenbasis", "liouville"):
            if SOLVERS[name].applicable(pair)[0]:
                if name == "separable" and float(pair.a.dim * pair.b.dim) ** 2 > SPECTRAL_ABOVE:
                    return "spectral"
                return name
    if method not in SOLVERS:
        raise MagretinaError(f"spin solver method = {method!r} is unknown; allowed 'auto', "
                             + ", ".join(repr(k) for k in SOLVERS))
    ok, why = SOLVERS[method].applicable(pair)
    if not ok:
        raise MagretinaError(f"spin solver '{method}' cannot be used for this radical pair: {why}")
    return method


def _fields(field_T):
    b = np.asarray(field_T, dtype=np.float64)
    if b.ndim not in (1, 2) or b.shape[-1] != 3:
        raise MagretinaError(f"field_T must have shape (3,) or (N, 3) (tesla, molecular frame), "
                             f"got {b.shape}")
    if not np.all(np.isfinite(b)):
        raise MagretinaError("field_T must be finite")
    return b


def yields(pair: RadicalPair, field_T, method: str = "auto", progress=None):
    """Singlet and triplet yields Φ_S, Φ_T for one or many field vectors.

    Parameters
    ----------
    pair : RadicalPair
    field_T : array_like, shape (3,) or (N, 3)
        Field vector(s) in the molecular frame, tesla.
    method : str
        'auto', 'separable', 'eigenbasis' or 'liouville'.
    progress : callable, optional
        Receives the number of field vectors finished, batch by batch.

    Returns
    -------
    (phi_s, phi_t) : floats for a (3,) field, else arrays of shape (N,)
    """
    if not isinstance(pair, RadicalPair):
        raise MagretinaError(f"pair must be a RadicalPair, got {type(pair).__name__}")
    b = _fields(field_T)
    name = choose_method(pair, method)
    check_memory(pair, name)
    flat = b.reshape(-1, 3)
    # identical field vectors (e.g. every direction at zero field) are solved once
    uniq, inverse = np.unique(flat, axis=0, return_inverse=True)
    if progress is not None and len(uniq) < len(flat):
        progress(len(flat) - len(uniq))
    ps, pt = SOLVERS[name].yields(pair, uniq, progress=progress)
    inverse = inverse.reshape(-1)
    ps, pt = ps[inverse], pt[inverse]
    if b.ndim == 1:
        return float(ps[0]), float(pt[0])
    return ps, pt


def singlet_yield(pair: RadicalPair, field_T, method: str = "auto", progress=None):
    """Singlet yield Φ_S = k_S ∫ Tr[P_S ρ(t)] dt (Haberkorn recombination).

    Parameters
    ----------
    pair : RadicalPair
    field_T : array_like, shape (3,) or (N, 3)
        Field vector(s) in the molecular frame, tesla.
    method : str
        'auto' (default), 'separable', 'eigenbasis' or 'liouville'; all exact.

    Returns
    -------
    float or ndarray of shape (N,)
        Φ_S, dimensionless in [1/4, 1] for a singlet-born pair.
    """
    return yields(pair, field_T, method=method, progress=progress)[0]
