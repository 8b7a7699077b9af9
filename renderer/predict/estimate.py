"""Maximum-likelihood heading estimates from simulated counts (Monte-Carlo checks of the bound).

Counts are drawn from the noise model about the mean counts of a true heading; the
estimate maximises the log-likelihood over a fine heading grid and is refined by a
parabola through the best grid point and its neighbours.  The spread of these
estimates over many draws approaches the Cramér–Rao bound 1/√J when counts are high
(ML is asymptotically efficient).  Axial responses leave ψ and ψ + 180° equally
likely at zero inclination; callers compare errors modulo the pattern's period.
This module is for checks and demonstrations, not a model of the animal's decoder.
"""

from __future__ import annotations

import numpy as np

from ..errors import MagretinaError
from .fisher import Setup, unit_counts


def mean_counts(setup: Setup, headings_deg) -> np.ndarray:
    """Mean counts per readout unit at each heading, shape (H, P)."""
    hd = np.atleast_1d(np.asarray(headings_deg, float))
    step = max(1, int(2_000_000 // max(setup.axes.shape[0], 1)))
    return np.concatenate([unit_counts(setup, np.radians(hd[k:k + step]))[0]
                           for k in range(0, hd.size, step)])


def simulate_counts(setup: Setup, noise, heading_deg, n_trials, rng) -> np.ndarray:
    """``n_trials`` independent count vectors at one heading, shape (n_trials, P)."""
    mu = mean_counts(setup, [heading_deg])[0]
    return noise.sample(np.broadcast_to(mu, (int(n_trials), mu.size)), rng)


def ml_heading(counts, setup: Setup, noise, grid_step_deg=0.05, chunk=256) -> np.ndarray:
    """Maximum-likelihood heading (degrees in [0, 360)) for each row of ``counts`` (K, P)."""
    n = np.atleast_2d(np.asarray(counts, float))
    if n.shape[1] != setup.n_pools:
        raise MagretinaError(f"counts: expected {setup.n_pools} readout units per row, got "
                             f"{n.shape[1]}")
    grid = np.arange(0.0, 360.0, float(grid_step_deg))
    mu = mean_counts(setup, grid)  # (G, P)
    if np.any(mu <= 0):
        raise MagretinaError("some mean counts are <= 0; the likelihood is undefined")
    G = grid.size
    out = np.empty(n.shape[0])
    for k0 in range(0, n.shape[0], chunk):
        nk = n[k0:k0 + chunk]
        if getattr(noise, "name", "") == "poisson":
            ll = nk @ np.log(mu).T - mu.sum(axis=1)[None, :]
        else:
            ll = np.stack([noise.loglik(nk, mu[g][None, :]).sum(axis=1) for g in range(G)], axis=1)
        i = np.argmax(ll, axis=1)
        rows = np.arange(nk.shape[0])
        y0, y1, y2 = ll[rows, (i - 1) % G], ll[rows, i], ll[rows, (i + 1) % G]
        den = y0 - 2 * y1 + y2
        with np.errstate(divide="ignore", invalid="ignore"):
            off = np.where(den < 0, 0.5 * (y0 - y2) / den, 0.0)
        out[k0:k0 + chunk] = (grid[i] + np.clip(off, -1, 1) * grid_step_deg) % 360.0
    return out


def wrapped_error_deg(estimate_deg, truth_deg, period_deg=360.0) -> np.ndarray:
    """Signed error in (−period/2, period/2]."""
    p = float(period_deg)
    return (np.asarray(estimate_deg) - truth_deg + p / 2) % p - p / 2


__all__ = ["mean_counts", "simulate_counts", "ml_heading", "wrapped_error_deg"]
