"""Count models: the mean photon count of a receptor and the noise around it.

A receptor's mean count in one integration time is

    μ = flux_per_s · integration_s · L · (1 + gain · m)

with ``flux_per_s`` the mean photon absorptions per second of one receptor (or pool
member) when the scene's linear luminance is 1, L the local linear scene luminance
(dimensionless, 0..1), m = s/⟨s⟩ − 1 the receptor's relative signal and ``gain`` the
dimensionless modulation gain.  Noise models say how counts scatter about μ; each
gives its variance as an affine function a·μ + b so that the Fisher kernels need only
the two numbers, plus ``sample`` and ``loglik`` for simulation and estimation.  The
registry ``NOISE`` maps names to classes: adding a noise model is one class here (or
one file beside it) and one registry line.  Nothing here knows about geometry.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import MagretinaError, check_range


@dataclass(frozen=True)
class PoissonNoise:
    """Photon shot noise: counts ~ Poisson(μ); variance μ."""

    name = "poisson"

    def variance_coeffs(self):
        """(a, b) with variance = a·μ + b (counts²)."""
        return 1.0, 0.0

    def sample(self, mu, rng):
        return rng.poisson(np.asarray(mu, float)).astype(np.float64)

    def loglik(self, n, mu):
        """log p(n | μ) up to terms free of μ: n log μ − μ (elementwise)."""
        mu = np.asarray(mu, float)
        return np.asarray(n, float) * np.log(mu) - mu

    def describe(self):
        return {"noise": "poisson"}


@dataclass(frozen=True)
class GaussianNoise:
    """Gaussian counts with variance shot·μ + floor_counts².

    ``floor_counts`` is an additive noise floor (dark/read noise, counts rms); with
    ``shot=True`` shot noise is included in its Gaussian (large-count) form.  The
    Fisher information used is Σ μ'²/σ², the information in the mean; the part
    carried by the heading dependence of σ² itself (Σ (σ²)'²/(2σ⁴)) is left out,
    which is exact for ``shot=False`` and a lower bound otherwise.
    """

    floor_counts: float = 1.0
    shot: bool = True
    name = "gaussian"

    def __post_init__(self):
        check_range("noise floor_counts", self.floor_counts, 0.0, None, unit="counts rms")
        if not self.shot and self.floor_counts == 0:
            raise MagretinaError("gaussian noise with shot = false needs floor_counts > 0")

    def variance_coeffs(self):
        return (1.0 if self.shot else 0.0), float(self.floor_counts) ** 2

    def variance(self, mu):
        a, b = self.variance_coeffs()
        return a * np.asarray(mu, float) + b

    def sample(self, mu, rng):
        mu = np.asarray(mu, float)
        return mu + np.sqrt(self.variance(mu)) * rng.standard_normal(mu.shape)

    def loglik(self, n, mu):
        v = self.variance(mu)
        return -0.5 * (np.asarray(n, float) - mu) ** 2 / v - 0.5 * np.log(v)

    def describe(self):
        return {"noise": "gaussian", "floor_counts": self.floor_counts, "shot": self.shot}


NOISE = {
    "poisson": PoissonNoise,
    "gaussian": GaussianNoise,
}


def make_noise(name="poisson", **kw):
    """Build a noise model by registry name."""
    try:
        cls = NOISE[name]
    except KeyError:
        raise MagretinaError(f"noise = {name!r}: allowed {', '.join(NOISE)}") from None
    return cls(**kw)


@dataclass(frozen=True)
class CountModel:
    """Mean counts per integration time and their noise.

    Parameters
    ----------
    flux_per_s : float
        Mean photon absorptions per second per receptor at linear scene luminance 1
        (s⁻¹, > 0).
    integration_s : float
        Integration time, s (> 0).
    gain : float
        Modulation gain (dimensionless, ≥ 0): μ ∝ 1 + gain·m.
    luminance : float
        Linear scene luminance seen by every receptor when no per-receptor values are
        given (dimensionless, > 0; 1 = the luminance at which ``flux_per_s`` holds).
    noise : PoissonNoise or GaussianNoise
    """

    flux_per_s: float = 1.0e4
    integration_s: float = 0.1
    gain: float = 0.1
    luminance: float = 1.0
    noise: object = field(default_factory=PoissonNoise)

    def __post_init__(self):
        check_range("flux_per_s", self.flux_per_s, 0.0, None, lo_open=True, unit="s^-1")
        check_range("integration_s", self.integration_s, 0.0, None, lo_open=True, unit="s")
        check_range("gain", self.gain, 0.0, None)
        check_range("luminance", self.luminance, 0.0, None, lo_open=True, unit="(linear, 1 = reference)")
        for k in ("flux_per_s", "integration_s", "gain", "luminance"):
            object.__setattr__(self, k, float(getattr(self, k)))

    @property
    def photons_per_integration(self) -> float:
        """flux · integration time: mean count at luminance 1 and no modulation."""
        return self.flux_per_s * self.integration_s

    def describe(self) -> dict:
        d = {"flux_per_s": self.flux_per_s, "integration_s": self.integration_s,
             "gain": self.gain, "luminance": self.luminance}
        d.update(self.noise.describe())
        return d
