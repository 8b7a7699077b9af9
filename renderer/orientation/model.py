"""Predicted headings in an orientation experiment, from the receptor-count likelihood.

This is a hypothetical model of how an animal could use the modulation pattern
(a prediction of a hypothesis, not a measurement of any animal):

* The animal learned a *template*: the mean receptor counts μ_nat(φ) it receives at
  every heading φ in the natural (ambient) field of the site, through the same
  receptor mosaic, response, alignment and count model that :mod:`renderer.predict`
  uses (:func:`renderer.predict.fisher.make_setup` and
  :func:`renderer.predict.fisher.unit_counts`).
* In a test condition (coil manipulation, zero field, RF) it starts at a heading
  ψ0 (uniform, as after release into a funnel), sees counts with mean μ_c(ψ0), and
  weighs each template heading φ by how well it matches: the count likelihood of
  the template pattern given what it sees.  The *grid* evaluation uses the expected
  log-likelihood ratio, i.e. weight ∝ exp(−KL(p(n | μ_c(ψ0)) ‖ p(n | μ_nat(φ)))),
  the Kullback-Leibler divergence of the noise model's count distributions (Poisson
  or Gaussian, summed over readout units); this is exact on the heading grid.  The
  *Monte-Carlo* evaluation draws counts from the noise model and takes the
  maximum-likelihood φ (the ideal observer of :mod:`renderer.predict.estimate`).
  Both give the same Gaussian of variance 1/J (the Cramér-Rao bound, J the Fisher
  information) when counts are high; at low counts they are two readings of the
  rule and may differ.
* Believing it faces φ, the animal turns to its preferred heading ψ*: it ends at
  ψ0 + ψ* − φ.  In the natural field φ ≈ ψ0, so it heads to ψ*.
* Optional behaviour on top: a von Mises spread of concentration κ_b (motor and
  motivational scatter) and a share q of animals that do not orient (uniform).

Consequences that the tests check: a rotated horizontal component rotates the
prediction by the same angle; an axial (inclination) compass, whose response is
even in cos θ, sees an inverted vertical component as a 180° rotation and reverses;
a *polarity compass* — represented here by a hypothetical signed response with odd
Legendre terms (e.g. ``Legendre([c0, c1, ...])`` with c1 ≠ 0), whose signal changes
when the field is reversed — keeps its heading (Wiltschko & Wiltschko 1972, Science
176:62 found birds behave as the axial compass does); a zero field or a response
with no anisotropy gives a uniform prediction.  Nothing here reads files or
study configuration.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from threadpoolctl import threadpool_limits

from ..errors import MagretinaError, check_range
from ..field import FieldVector
from ..predict.fisher import make_setup, unit_counts

__all__ = ["Condition", "Hypothesis", "Behaviour", "Prediction", "Predictor",
           "kl_matrix", "decode_weights", "offset_distribution", "von_mises_smooth",
           "predict_condition", "sample_headings", "distribution_stats",
           "density_at", "CAUTION"]

CAUTION = ("Predicted headings are predictions of a hypothetical model (template matching "
           "of receptor counts under a stated hypothesis), not measurements of any animal.")


@dataclass(frozen=True)
class Condition:
    """One test condition: the field presented to the animal and the response in force.

    Parameters
    ----------
    name : str
    b_ned_T : array (3,)
        Presented field, local NED frame, tesla (the ambient field after the coil
        manipulations).
    response_key : str
        Which of a hypothesis' responses is in force ("default", or the name of an
        alternative such as a table computed with an RF field on).
    label : str
        Description of the manipulation (e.g. "rotate90+invert").
    """

    name: str
    b_ned_T: tuple
    response_key: str = "default"
    label: str = ""

    def __post_init__(self):
        b = np.asarray(self.b_ned_T, float).reshape(3)
        if not np.all(np.isfinite(b)):
            raise MagretinaError(f"condition {self.name!r}: field must be finite, got {b.tolist()}")
        object.__setattr__(self, "b_ned_T", tuple(float(x) for x in b))


@dataclass(frozen=True)
class Hypothesis:
    """One hypothesis about the receptors: layout (with alignment), response(s), product.

    ``responses`` maps response keys named by conditions (RF on, switched responses)
    to responses; "default" is ``response``.
    """

    name: str
    layout: object
    response: object
    product: str = "singlet"
    responses: dict = field(default_factory=dict)
    description: str = ""

    def response_for(self, key):
        if key in (None, "", "default"):
            return self.response
        try:
            return self.responses[key]
        except KeyError:
            raise MagretinaError(f"hypothesis {self.name!r}: condition needs response {key!r}, "
                                 f"which it does not define (has: default"
                                 + "".join(f", {k}" for k in sorted(self.responses)) + ")") from None


@dataclass(frozen=True)
class Behaviour:
    """What the animal does with its heading estimate.

    Parameters
    ----------
    preferred_heading_deg : float
        Heading it chooses in the natural field, degrees clockwise from north.
    kappa : float
        Extra behavioural von Mises concentration (≥ 0; 0 = none).
    non_orienting : float
        Share of animals choosing at random, in [0, 1).
    pitch_deg, roll_deg : float
        Head pose while choosing (degrees, as :class:`renderer.pose.Pose`).
    """

    preferred_heading_deg: float = 0.0
    kappa: float = 0.0
    non_orienting: float = 0.0
    pitch_deg: float = 0.0
    roll_deg: float = 0.0

    def __post_init__(self):
        check_range("preferred_heading_deg", self.preferred_heading_deg, -360.0, 360.0,
                    unit="degrees")
        check_range("kappa (behavioural spread)", self.kappa, 0.0, 1e6)
        check_range("non_orienting", self.non_orienting, 0.0, 1.0, hi_open=True, unit="share")
        check_range("pitch_deg", self.pitch_deg, -90.0, 90.0, unit="degrees")
        check_range("roll_deg", self.roll_deg, -180.0, 180.0, unit="degrees")


# ----------------------------------------------------------------------------- maths
def kl_matrix(mu_c, mu_t, noise):
    """KL divergences D[i, j] = KL(p(n | mu_c[i]) ‖ p(n | mu_t[j])), summed over units.

    Parameters
    ----------
    mu_c : (G0, P) mean counts seen (condition), counts
    mu_t : (G, P) template mean counts, counts
    noise : PoissonNoise or GaussianNoise (variance a·μ + b)

    Returns
    -------
    (G0, G) array, nats.  Poisson: Σ a log(a/b) − a + b.  Gaussian:
    ½ Σ [log(v_b/v_a) + (v_a + (a − b)²)/v_b − 1] (Cover & Thomas 2006, ch. 8;
    common practice).  Written with matrix products so that large grids stay fast.
    """
    # small products: one BLAS thread (OpenBLAS threads spin and slow down on a busy
    # machine, as noted for the spin solvers in DEVELOPERS.md)
    with threadpool_limits(1, "blas"):
        return _kl_matrix(mu_c, mu_t, noise)


def _kl_matrix(mu_c, mu_t, noise):
    a = np.asarray(mu_c, float)
    b = np.asarray(mu_t, float)
    if np.any(a <= 0) or np.any(b <= 0):
        raise MagretinaError("mean counts must be > 0 for the count likelihood (raise flux, "
                             "integration time or luminance, or lower the gain)")
    name = getattr(noise, "name", "")
    if name == "poisson":
        D = (np.sum(a * np.log(a), axis=1)[:, None] - a @ np.log(b).T
             - a.sum(axis=1)[:, None] + b.sum(axis=1)[None, :])
    elif name == "gaussian":
        ca, cb = noise.variance_coeffs()
        va, vb = ca * a + cb, ca * b + cb
        ivb = 1.0 / vb
        D = 0.5 * (np.log(vb).sum(axis=1)[None, :] - np.log(va).sum(axis=1)[:, None]
                   + (va + a * a) @ ivb.T - 2.0 * a @ (b * ivb).T
                   + np.sum(b * b * ivb, axis=1)[None, :] - a.shape[1])
    else:
        raise MagretinaError(f"noise model {name!r}: the orientation model handles "
                             f"'poisson' and 'gaussian'")
    return np.maximum(D, 0.0)


def decode_weights(D):
    """Row-normalised weights exp(−D) (G0, G): the chance of reading heading j at start i."""
    W = np.exp(-(D - D.min(axis=1, keepdims=True)))
    return W / W.sum(axis=1, keepdims=True)


def offset_distribution(W):
    """P(δ_k), δ = ψ0 − φ = k·h, averaged over uniform start headings ψ0 (G,).

    ``W`` is (G, G) on one grid of G headings h = 360°/G apart.
    """
    G = W.shape[0]
    i = np.arange(G)[:, None]
    k = np.arange(G)[None, :]
    return W[i, (i - k) % G].mean(axis=0)


def von_mises_smooth(p, kappa):
    """Circular convolution of a grid distribution p (G,) with a von Mises(0, κ).

    The kernel is the von Mises density at the grid offsets, normalised on the grid
    (its discretisation error is below 1e-12 for κ·h² small; κ = 0 returns p).
    """
    if kappa <= 0:
        return np.asarray(p, float)
    G = p.size
    d = 2 * math.pi * np.arange(G) / G
    ker = np.exp(kappa * (np.cos(d) - 1.0))
    ker /= ker.sum()
    out = np.real(np.fft.ifft(np.fft.fft(p) * np.fft.fft(ker)))
    out = np.maximum(out, 0.0)
    return out / out.sum()


def distribution_stats(grid_deg, prob, axial=False) -> dict:
    """Mean direction, r and circular SD of a distribution on a heading grid.

    ``prob`` (G,) sums to 1; the same definitions as :func:`describe` with weights.
    """
    a = np.radians(np.asarray(grid_deg, float)) * (2.0 if axial else 1.0)
    C, S = float(np.sum(prob * np.cos(a))), float(np.sum(prob * np.sin(a)))
    r = min(1.0, math.hypot(C, S))
    mean = math.degrees(math.atan2(S, C)) % 360.0 if r > 1e-12 else float("nan")
    if axial and not math.isnan(mean):
        mean = (mean / 2.0) % 180.0
    sd = math.degrees(math.sqrt(-2.0 * math.log(r))) if r > 1e-12 else float("inf")
    return {"mean_deg": mean, "r": r, "circular_sd_deg": sd / 2.0 if axial else sd}


def density_at(grid_deg, density_per_rad, angles_deg):
    """Periodic linear interpolation of a density on an equally spaced grid (per rad)."""
    g = np.asarray(grid_deg, float)
    G = g.size
    h = 360.0 / G
    x = ((np.asarray(angles_deg, float) - g[0]) % 360.0) / h
    i0 = np.floor(x).astype(int) % G
    t = x - np.floor(x)
    d = np.asarray(density_per_rad, float)
    return (1 - t) * d[i0] + t * d[(i0 + 1) % G]


# ----------------------------------------------------------------------------- prediction
@dataclass(frozen=True)
class Prediction:
    """Predicted heading distribution of one hypothesis in one condition.

    ``grid_deg`` (G,) headings 0..360 − h; ``prob`` (G,) probability of each grid
    cell (sums to 1), with behaviour included; ``prob_sensory`` without the
    behavioural spread and non-orienting share; ``stats`` mean direction, r,
    circular SD of ``prob`` (and ``sensory`` of ``prob_sensory``).
    """

    hypothesis: str
    condition: str
    grid_deg: np.ndarray
    prob: np.ndarray
    prob_sensory: np.ndarray
    stats: dict
    sensory: dict

    @property
    def density_per_rad(self):
        return self.prob * self.grid_deg.size / (2 * math.pi)

    def to_dict(self, with_grid=True) -> dict:
        d = {"hypothesis": self.hypothesis, "condition": self.condition, **self.stats,
             "sensory_mean_deg": self.sensory["mean_deg"], "sensory_r": self.sensory["r"],
             "sensory_circular_sd_deg": self.sensory["circular_sd_deg"]}
        if with_grid:
            d["grid_deg"] = [float(x) for x in self.grid_deg]
            d["prob"] = [float(x) for x in self.prob]
        return d


class Predictor:
    """Template and condition counts of one hypothesis, prepared once.

    Parameters
    ----------
    hypothesis : Hypothesis
    ambient : FieldVector (the natural field of the site; the template is learned in it)
    mosaic : renderer.mosaic.Mosaic built on ``hypothesis.layout``
    counts : renderer.predict.CountModel
    behaviour : Behaviour
    n_headings : int
        Grid size G (heading step 360/G degrees); ≥ 36.
    """

    def __init__(self, hypothesis, ambient, mosaic, counts, behaviour, n_headings=360):
        self.h = hypothesis
        self.ambient = ambient
        self.mosaic = mosaic
        self.counts = counts
        self.behaviour = behaviour
        G = int(n_headings)
        if G < 36 or G > 7200 or G % 2:
            raise MagretinaError(f"n_headings = {n_headings!r}: allowed even numbers 36..7200 "
                                 f"(grid step 10° .. 0.05°)")
        self.G = G
        self.psi = 2 * math.pi * np.arange(G) / G
        self.template = self._counts(ambient.ned_T, "default")

    def _counts(self, b_ned_T, response_key):
        f = FieldVector(np.asarray(b_ned_T, float), model="condition")
        setup = make_setup(f, self.h.layout, self.h.response_for(response_key), self.mosaic,
                           self.counts, self.behaviour.pitch_deg, self.behaviour.roll_deg,
                           self.h.product)
        mu, _ = unit_counts(setup, self.psi)
        return mu

    def condition_counts(self, condition: Condition):
        """Mean counts (G, P) in a condition at every grid heading."""
        return self._counts(condition.b_ned_T, condition.response_key)

    def predict(self, condition: Condition) -> Prediction:
        """The exact grid prediction for ``condition`` (see the module docstring)."""
        mu_c = self.condition_counts(condition)
        W = decode_weights(kl_matrix(mu_c, self.template, self.counts.noise))
        p_delta = offset_distribution(W)
        return self._finish(condition, p_delta)

    def _finish(self, condition, p_delta):
        G = self.G
        step = 360.0 / G
        b = self.behaviour
        # chosen heading ψ* + δ_k; put it on the grid 0..360 by a fractional shift
        shift = (b.preferred_heading_deg % 360.0) / step
        k0 = int(math.floor(shift))
        t = shift - k0
        sens = (1 - t) * np.roll(p_delta, k0) + t * np.roll(p_delta, k0 + 1)
        sens = sens / sens.sum()
        prob = von_mises_smooth(sens, b.kappa)
        prob = (1.0 - b.non_orienting) * prob + b.non_orienting / G
        grid = step * np.arange(G)
        return Prediction(self.h.name, condition.name, grid, prob, sens,
                          distribution_stats(grid, prob), distribution_stats(grid, sens))

    def monte_carlo(self, condition: Condition, n_animals, rng, refine=True):
        """Simulated chosen headings (n_animals,) degrees: ML decoding of noisy counts.

        Each animal starts at a uniform grid heading, draws counts from the noise
        model, reads the maximum-likelihood template heading (parabolic refinement
        between grid nodes, as :func:`renderer.predict.estimate.ml_heading`), turns to
        the preferred heading, then the behavioural spread and the non-orienting
        share are applied.
        """
        n = int(n_animals)
        if n < 1:
            raise MagretinaError(f"n_animals = {n_animals!r}: must be >= 1")
        with threadpool_limits(1, "blas"):
            return self._monte_carlo(condition, n, rng, refine)

    def _monte_carlo(self, condition, n, rng, refine):
        mu_c = self.condition_counts(condition)
        G = self.G
        start = rng.integers(0, G, n)
        counts = self.counts.noise.sample(mu_c[start], rng)
        T = self.template
        noise = self.counts.noise
        out = np.empty(n)
        if getattr(noise, "name", "") == "poisson":
            logT, sumT = np.log(T), T.sum(axis=1)
        for k0 in range(0, n, 512):
            nk = counts[k0:k0 + 512]
            if getattr(noise, "name", "") == "poisson":
                ll = nk @ logT.T - sumT[None, :]
            else:
                ll = np.stack([noise.loglik(nk, T[g][None, :]).sum(axis=1) for g in range(G)],
                              axis=1)
            i = np.argmax(ll, axis=1)
            off = np.zeros(i.size)
            if refine:
                rows = np.arange(i.size)
                y0, y1, y2 = ll[rows, (i - 1) % G], ll[rows, i], ll[rows, (i + 1) % G]
                den = y0 - 2 * y1 + y2
                with np.errstate(divide="ignore", invalid="ignore"):
                    off = np.clip(np.where(den < 0, 0.5 * (y0 - y2) / den, 0.0), -1, 1)
            phi = (i + off) * 360.0 / G
            out[k0:k0 + 512] = start[k0:k0 + 512] * 360.0 / G - phi
        b = self.behaviour
        chosen = out + b.preferred_heading_deg
        if b.kappa > 0:
            chosen = chosen + np.degrees(rng.vonmises(0.0, b.kappa, n))
        if b.non_orienting > 0:
            lost = rng.random(n) < b.non_orienting
            chosen[lost] = rng.uniform(0.0, 360.0, int(lost.sum()))
        return chosen % 360.0


def predict_condition(hypothesis, ambient, mosaic, counts, behaviour, condition,
                      n_headings=360) -> Prediction:
    """One-shot convenience: :class:`Predictor` then :meth:`Predictor.predict`."""
    return Predictor(hypothesis, ambient, mosaic, counts, behaviour, n_headings).predict(condition)


def sample_headings(prediction: Prediction, n, rng) -> np.ndarray:
    """Draw n headings (degrees) from a grid prediction (uniform within a grid cell).

    Used for power by simulation: the sample an experiment of n animals would give
    if the hypothesis were right.
    """
    G = prediction.grid_deg.size
    step = 360.0 / G
    idx = rng.choice(G, size=int(n), p=prediction.prob)
    return (prediction.grid_deg[idx] + rng.uniform(-0.5, 0.5, int(n)) * step) % 360.0
