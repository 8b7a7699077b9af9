"""The inclination-compass signature: can the model tell poleward from equatorward?

An inclination compass (Wiltschko & Wiltschko 1972, Science 176:62) distinguishes
the directions along which the field's axis dips, not its polarity.  In a model
this shows as a difference between the receptor counts at heading ψ and at ψ + 180°.
With a horizontal field (inclination 0°) b_head(ψ + 180°) = −b_head(ψ) for any pitch
and roll, and radical-pair yields are unchanged by reversing the field (time-reversal
symmetry), so the difference vanishes; with a vertical field (90°) yaw does not move
the field in the head and there is no heading information at all.  Numbers only; no
claim about any animal.
"""

from __future__ import annotations

import numpy as np

from .estimate import mean_counts
from .fisher import Setup


def compass_signature(setup: Setup, headings_deg=None) -> dict:
    """Asymmetry between headings ψ and ψ + 180°.

    Returns
    -------
    dict of float
        ``asymmetry_rms``: RMS over headings and readout units of
        (μ(ψ) − μ(ψ+180°)) / (½(μ(ψ) + μ(ψ+180°))), dimensionless;
        ``asymmetry_dprime_mean`` / ``_min``: the discriminability
        d′(ψ) = sqrt(Σ_k (μ_k(ψ) − μ_k(ψ+180°))² / v(μ̄_k)) of the two headings from one
        integration time of counts, v the noise variance at the mean count μ̄_k,
        averaged over and minimised over headings.
    """
    hd = np.arange(0.0, 180.0, 5.0) if headings_deg is None else np.asarray(headings_deg, float)
    a = mean_counts(setup, hd)
    b = mean_counts(setup, hd + 180.0)
    mbar = 0.5 * (a + b)
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.where(mbar > 0, (a - b) / mbar, 0.0)
        v = setup.var_a * mbar + setup.var_b
        d2 = np.where(v > 0, (a - b) ** 2 / v, 0.0).sum(axis=1)
    dp = np.sqrt(d2)
    return {"asymmetry_rms": float(np.sqrt(np.mean(rel ** 2))),
            "asymmetry_dprime_mean": float(np.mean(dp)),
            "asymmetry_dprime_min": float(np.min(dp))}


__all__ = ["compass_signature"]
