"""Fisher information about heading carried by a receptor mosaic, and its Cramér–Rao bound.

For readout units k (receptors, or pools of them) with mean counts μ_k(ψ) and noise
variance v_k = a·μ_k + b (Poisson: a = 1, b = 0),

    J(ψ) = Σ_k μ_k'(ψ)² / v_k,          σ_ψ ≥ 1/√J   (Cramér–Rao)

with ψ the yaw (heading) in radians and ' = d/dψ.  The derivative is exact: the
field in the head frame is b_head(ψ) = Mᵀ R_z(−ψ) b_world (M the pitch–roll part of
the pose), differentiated analytically through the rotation; each receptor's
cos θ = a · b_eye and its derivative follow by linearity; the signal is a cubic
Hermite interpolant of the response with nodal values f and slopes f' (so the
derivative used is the exact derivative of the function evaluated); the modulation
m = s/⟨s⟩ − 1 is normalised by the mean over all receptors of the layout at the same
heading, whose derivative is included.  :func:`counts_direct` evaluates the same
model without tables and accepts complex headings, for complex-step checks.
numba kernel with a NumPy twin; this module does no plotting or I/O.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numba import njit, prange

from .. import pipeline
from ..errors import MagretinaError
from ..pose import Pose
from ..response.base import LUT_SIZE, lut_nodes

#: Nodes of the cubic Hermite table used for predictions.  With exact slopes at the
#: nodes the interpolation error is h⁴/384·max|f⁗| (h = 2/1024: < 1e-13·max|f⁗|) and
#: the per-interval coefficients (32 kB) stay in a core's L1 cache.
HERMITE_SIZE = 1025


def hermite_coefficients(lut, dlut) -> np.ndarray:
    """Per-interval cubic coefficients (L−1, 4) of the Hermite interpolant of (f, f').

    On interval j with local t ∈ [0, 1]: f = a0 + a1 t + a2 t² + a3 t³, where the
    slopes are scaled by the node spacing h = 2/(L − 1).
    """
    h = 2.0 / (lut.shape[0] - 1)
    f0, f1 = lut[:-1], lut[1:]
    d0, d1 = dlut[:-1] * h, dlut[1:] * h
    return np.ascontiguousarray(np.stack([f0, d0, -3 * f0 - 2 * d0 + 3 * f1 - d1,
                                          2 * f0 + d0 - 2 * f1 + d1], axis=-1))


# ---------------------------------------------------------------------------
# response derivative tables
# ---------------------------------------------------------------------------

def _axial(response):
    if not getattr(response, "axial", True):
        return response.axial_average()
    return response


def derivative_lut(response, product="singlet", n=LUT_SIZE) -> np.ndarray:
    """df/d(cos θ) of the receptor signal on ``lut_nodes(n)``, shape (n,).

    Legendre series are differentiated exactly (``numpy.polynomial.legendre.legder``);
    a response with a ``derivative(cos_theta)`` method is asked directly; tabulated
    responses use their spline, df/dc = −(df/dθ)/sin θ with the limit −d²f/dθ² at
    the poles; anything else gets fourth-order differences of ``f`` (one-sided at
    ±1, error O(h⁴) with h = 2/(n − 1)).  Triplet signal s = 1 − f: the sign flips.
    """
    from numpy.polynomial import legendre as npleg

    from ..response.legendre import Legendre
    from ..response.tabulated import Tabulated

    r = _axial(response)
    c = lut_nodes(n)
    if isinstance(r, Legendre):
        d = npleg.legval(c, npleg.legder(r.coeffs)) if r.coeffs.size > 1 else np.zeros(n)
    elif hasattr(r, "derivative"):
        d = np.asarray(r.derivative(c), float)
    elif isinstance(r, Tabulated):
        th = np.arccos(c)
        sp = r._spline
        st = np.sin(th)
        with np.errstate(divide="ignore", invalid="ignore"):
            d = np.where(st > 1e-6, -sp(th, 1) / np.where(st > 1e-6, st, 1.0), 0.0)
        d[0] = sp(math.pi, 2)   # c = -1, θ = π: dθ/dc = -1/sin θ, f_θ ≈ f_θθ (θ - π)
        d[-1] = -sp(0.0, 2)
    else:
        d = _fd4(r, c)
    d = np.ascontiguousarray(d, dtype=np.float64)
    if product == "triplet":
        d = -d
    return d


def _fd4(f, c):
    h = 2.0 / (c.size - 1)
    v = np.asarray(f(c), float)
    d = np.empty_like(v)
    d[2:-2] = (v[:-4] - 8 * v[1:-3] + 8 * v[3:-1] - v[4:]) / (12 * h)
    for i in (0, 1):
        d[i] = (-25 * v[i] + 48 * v[i + 1] - 36 * v[i + 2] + 16 * v[i + 3] - 3 * v[i + 4]) / (12 * h)
        j = -1 - i
        d[j] = (25 * v[j] - 48 * v[j - 1] + 36 * v[j - 2] - 16 * v[j - 3] + 3 * v[j - 4]) / (12 * h)
    return d


# ---------------------------------------------------------------------------
# heading geometry
# ---------------------------------------------------------------------------

def field_eye_vs_heading(b_world_unit, R_eye_head, M_world_head0, headings_rad):
    """Unit field in each eye's frame and its derivative with respect to yaw.

    Parameters
    ----------
    b_world_unit : (3,) unit field, NED.
    R_eye_head : (E, 3, 3)
    M_world_head0 : (3, 3) R_world_head of the pose at yaw 0 (pitch and roll only).
    headings_rad : (H,) yaw angles, radians (real or complex for complex steps).

    Returns
    -------
    b_eye, db_eye : (H, E, 3)
        b_eye = R_eye_head Mᵀ R_z(−ψ) b_world and its ψ-derivative (per radian).
    """
    psi = np.asarray(headings_rad)
    c, s = np.cos(psi), np.sin(psi)
    bx, by, bz = (float(x) for x in b_world_unit)
    # R_z(-psi) b and d/dpsi of it (R_world_head = R_z(psi) M for intrinsic Z-Y-X)
    w = np.stack([c * bx + s * by, -s * bx + c * by, np.full_like(c, bz)], axis=-1)
    dw = np.stack([-s * bx + c * by, -c * bx - s * by, np.zeros_like(c)], axis=-1)
    A = np.einsum("eij,kj->eik", R_eye_head, M_world_head0)  # R_eye_head Mᵀ
    b_eye = np.einsum("eij,hj->hei", A, w)
    db_eye = np.einsum("eij,hj->hei", A, dw)
    return np.ascontiguousarray(b_eye), np.ascontiguousarray(db_eye)


# ---------------------------------------------------------------------------
# the prepared problem
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Setup:
    """Everything the Fisher kernels read, for one field, layout, response, mosaic and counts."""

    b_world_unit: np.ndarray
    R_eye_head: np.ndarray
    M_world_head0: np.ndarray
    lut: np.ndarray
    dlut: np.ndarray
    coef: np.ndarray
    axes: np.ndarray
    eye_index: np.ndarray
    eye_start: np.ndarray
    amp: np.ndarray
    pool: np.ndarray
    pool_eye: np.ndarray
    gain: float
    var_a: float
    var_b: float
    signal_fn: object
    eye_names: tuple
    zero_field: bool

    @property
    def n_pools(self):
        return int(self.pool_eye.shape[0])

    @property
    def pooled(self):
        return self.n_pools != self.axes.shape[0]


def make_setup(field, layout, response, mosaic, counts, pitch_deg=0.0, roll_deg=0.0,
               product="singlet", luminance=None) -> Setup:
    """Pack the inputs of :func:`fisher_information` and friends.

    ``luminance`` (N,) optionally gives each receptor's linear scene luminance (held
    fixed while heading varies, so the scene's own heading cues are excluded);
    default ``counts.luminance`` everywhere.
    """
    inputs = pipeline.prepare(field, Pose(0.0, pitch_deg, roll_deg), layout, response, product)
    zero = inputs.total_T == 0.0
    if zero:  # as pipeline.prepare: the response's spherical mean everywhere
        lut = np.full(HERMITE_SIZE, float(inputs.lut[0]))
        dlut = np.zeros(HERMITE_SIZE)
    else:
        lut = pipeline.response_lut(response, product, HERMITE_SIZE)
        dlut = derivative_lut(response, product, HERMITE_SIZE)
    r = _axial(response)
    from numpy.polynomial import legendre as npleg

    from ..response.legendre import Legendre

    if isinstance(r, Legendre):  # evaluated on complex arguments too (complex step)
        coeffs = r.coeffs
        r = lambda c: npleg.legval(c, coeffs)  # noqa: E731
    if zero:
        const = float(lut[0])
        signal_fn = lambda c: np.full(np.shape(c), const) + 0 * c  # noqa: E731
    elif product == "triplet":
        signal_fn = lambda c: 1.0 - r(c)  # noqa: E731
    else:
        signal_fn = r
    b = np.asarray(field.ned_T, float)
    b_unit = b / inputs.total_T if not zero else np.array([0.0, 0.0, 1.0])
    N = mosaic.n_receptors
    if luminance is None:
        lum = np.full(N, counts.luminance)
    else:
        lum = np.asarray(luminance, float)
        if lum.shape != (N,):
            raise MagretinaError(f"luminance: expected one value per receptor ({N}), got shape "
                                 f"{lum.shape}")
        if not np.all(np.isfinite(lum)) or np.any(lum < 0):
            raise MagretinaError("luminance: values must be finite and >= 0 (linear light)")
    amp = counts.photons_per_integration * lum
    a, bb = counts.noise.variance_coeffs()
    M0 = Pose(0.0, pitch_deg, roll_deg).R_world_head
    # receptors grouped by eye (stable), so the kernel streams each eye's rows with its
    # field held in registers; pool ids are unchanged, so per-unit results are too
    order = np.argsort(mosaic.eye_index, kind="stable")
    eye_index = np.ascontiguousarray(mosaic.eye_index[order], dtype=np.int64)
    E = inputs.R_eye_head.shape[0]
    eye_start = np.searchsorted(eye_index, np.arange(E + 1)).astype(np.int64)
    return Setup(b_unit, inputs.R_eye_head, M0, lut, dlut, hermite_coefficients(lut, dlut),
                 np.ascontiguousarray(mosaic.axes_eye[order]), eye_index, eye_start,
                 np.ascontiguousarray(amp[order]),
                 np.ascontiguousarray(mosaic.pool[order], dtype=np.int64),
                 np.ascontiguousarray(mosaic.pool_eye, dtype=np.int64), counts.gain, float(a),
                 float(bb), signal_fn, mosaic.eye_names, zero)


# ---------------------------------------------------------------------------
# numba kernel
# ---------------------------------------------------------------------------

@njit(cache=True, inline="always")
def _hermite(coef, c):
    """Cubic Hermite interpolant on linspace(-1, 1, L) at c: (f, df/dc)."""
    n1 = coef.shape[0]
    inv_h = 0.5 * n1
    x = (c + 1.0) * inv_h
    x = min(max(x, 0.0), float(n1))
    j = min(int(x), n1 - 1)
    t = x - j
    a0 = coef[j, 0]
    a1 = coef[j, 1]
    a2 = coef[j, 2]
    a3 = coef[j, 3]
    return ((a3 * t + a2) * t + a1) * t + a0, ((3.0 * a3 * t + 2.0 * a2) * t + a1) * inv_h


@njit(parallel=True, cache=True)
def fisher_kernel(b_eye, db_eye, axes, eye_start, amp, pool, pool_eye, pooled, coef, gain,
                  var_a, var_b, out_J, out_min_mu):
    """Fisher information per heading and eye.

    b_eye, db_eye (H, E, 3); axes (N, 3) with the receptors of eye e in rows
    eye_start[e]:eye_start[e+1]; pool (N,) int64; amp (N,) counts at m = 0; pool_eye
    (P,); ``pooled`` False means every receptor is its own unit; coef the Hermite
    coefficients (:func:`hermite_coefficients`).  Fills out_J (H, E) in rad⁻² and
    out_min_mu (H,) with the smallest mean count.  Two passes over the receptors per
    heading: the layout mean ⟨s⟩ and its derivative, then the sums.
    """
    H = b_eye.shape[0]
    E = b_eye.shape[1]
    N = axes.shape[0]
    P = pool_eye.shape[0]
    for h in prange(H):
        S = 0.0
        dS = 0.0
        for e in range(E):
            bx, by, bz = b_eye[h, e, 0], b_eye[h, e, 1], b_eye[h, e, 2]
            dx, dy, dz = db_eye[h, e, 0], db_eye[h, e, 1], db_eye[h, e, 2]
            for i in range(eye_start[e], eye_start[e + 1]):
                ax = axes[i, 0]
                ay = axes[i, 1]
                az = axes[i, 2]
                s, ds = _hermite(coef, ax * bx + ay * by + az * bz)
                S += s
                dS += ds * (ax * dx + ay * dy + az * dz)
        S /= N
        dS /= N
        inv = 1.0 / S
        k2 = dS * inv * inv
        mn = np.inf
        mu_p = np.zeros(P if pooled else 0)
        dmu_p = np.zeros(P if pooled else 0)
        for e in range(E):
            bx, by, bz = b_eye[h, e, 0], b_eye[h, e, 1], b_eye[h, e, 2]
            dx, dy, dz = db_eye[h, e, 0], db_eye[h, e, 1], db_eye[h, e, 2]
            acc = 0.0
            for i in range(eye_start[e], eye_start[e + 1]):
                ax = axes[i, 0]
                ay = axes[i, 1]
                az = axes[i, 2]
                s, ds = _hermite(coef, ax * bx + ay * by + az * bz)
                A = amp[i]
                mu = A * (1.0 + gain * (s * inv - 1.0))
                dmu = A * gain * (ds * (ax * dx + ay * dy + az * dz) * inv - s * k2)
                if pooled:
                    mu_p[pool[i]] += mu
                    dmu_p[pool[i]] += dmu
                else:
                    mn = min(mn, mu)
                    v = var_a * mu + var_b
                    if v > 0.0:
                        acc += dmu * dmu / v
            out_J[h, e] = acc
        if pooled:
            for p in range(P):
                mu = mu_p[p]
                mn = min(mn, mu)
                v = var_a * mu + var_b
                if v > 0.0:
                    out_J[h, pool_eye[p]] += dmu_p[p] * dmu_p[p] / v
        out_min_mu[h] = mn


# ---------------------------------------------------------------------------
# NumPy twins and references
# ---------------------------------------------------------------------------

def hermite_numpy(coef, c):
    """NumPy twin of the kernel's Hermite lookup: (f, df/dc) at c (any shape)."""
    n1 = coef.shape[0]
    inv_h = 0.5 * n1
    x = np.clip((np.asarray(c, float) + 1.0) * inv_h, 0.0, float(n1))
    j = np.minimum(x.astype(np.int64), n1 - 1)
    t = x - j
    a0, a1, a2, a3 = coef[j, 0], coef[j, 1], coef[j, 2], coef[j, 3]
    return ((a3 * t + a2) * t + a1) * t + a0, ((3.0 * a3 * t + 2.0 * a2) * t + a1) * inv_h


def counts_numpy(setup: Setup, b_eye, db_eye):
    """Mean counts per readout unit and their yaw derivative for one heading.

    b_eye, db_eye (E, 3) -> (μ (P,), dμ/dψ (P,)), counts and counts per radian.
    """
    e = setup.eye_index
    c = np.einsum("ij,ij->i", setup.axes, b_eye[e])
    dc = np.einsum("ij,ij->i", setup.axes, db_eye[e])
    s, ds = hermite_numpy(setup.coef, c)
    ds = ds * dc
    S, dS = s.mean(), ds.mean()
    mu = setup.amp * (1.0 + setup.gain * (s / S - 1.0))
    dmu = setup.amp * setup.gain * (ds / S - s * dS / S ** 2)
    if setup.pooled:
        P = setup.n_pools
        mu = np.bincount(setup.pool, mu, P)
        dmu = np.bincount(setup.pool, dmu, P)
    return mu, dmu


def fisher_numpy(setup: Setup, headings_deg):
    """NumPy twin of :func:`fisher_kernel`: (J (H, E) rad⁻², min μ (H,))."""
    psi = np.radians(np.asarray(headings_deg, float))
    b_eye, db_eye = field_eye_vs_heading(setup.b_world_unit, setup.R_eye_head,
                                         setup.M_world_head0, psi)
    E = setup.R_eye_head.shape[0]
    J = np.zeros((psi.size, E))
    mn = np.empty(psi.size)
    for h in range(psi.size):
        mu, dmu = counts_numpy(setup, b_eye[h], db_eye[h])
        v = setup.var_a * mu + setup.var_b
        w = np.where(v > 0, dmu * dmu / np.where(v > 0, v, 1.0), 0.0)
        J[h] = np.bincount(setup.pool_eye, w, E)
        mn[h] = mu.min()
    return J, mn


def counts_direct(setup: Setup, heading_rad):
    """Mean counts per unit at one heading, evaluating the response itself (no table).

    ``heading_rad`` may be complex: with a response that is analytic in cos θ (a
    Legendre series) Im μ(ψ + iε)/ε is the complex-step derivative (Squire & Trapp
    1998, SIAM Rev. 40:110), free of cancellation error.
    """
    b_eye, _ = field_eye_vs_heading(setup.b_world_unit, setup.R_eye_head, setup.M_world_head0,
                                    np.atleast_1d(heading_rad))
    b = b_eye[0]
    c = np.einsum("ij,ij->i", setup.axes, b[setup.eye_index])
    s = setup.signal_fn(c)
    S = s.mean()
    mu = setup.amp * (1.0 + setup.gain * (s / S - 1.0))
    if setup.pooled:
        mu = (np.bincount(setup.pool, mu.real, setup.n_pools)
              + 1j * np.bincount(setup.pool, np.imag(mu), setup.n_pools)) if np.iscomplexobj(mu) \
            else np.bincount(setup.pool, mu, setup.n_pools)
    return mu


def fisher_complex_step(setup: Setup, headings_deg, eps=1e-20):
    """J (H, E) with dμ/dψ by complex step on :func:`counts_direct` (reference)."""
    E = setup.R_eye_head.shape[0]
    out = np.zeros((len(headings_deg), E))
    probe = counts_direct(setup, 0.3 + 1j * eps)
    if not np.iscomplexobj(probe) or (not setup.zero_field and not np.any(probe.imag)):
        raise MagretinaError("complex step needs a response analytic in cos θ that accepts "
                             "complex input (a Legendre series); use fisher_finite_difference")
    for h, psi in enumerate(np.radians(np.asarray(headings_deg, float))):
        mu_c = counts_direct(setup, psi + 1j * eps)
        mu, dmu = mu_c.real, mu_c.imag / eps
        v = setup.var_a * mu + setup.var_b
        out[h] = np.bincount(setup.pool_eye, dmu * dmu / v, E)
    return out


def fisher_finite_difference(setup: Setup, headings_deg, step_rad=1e-2):
    """J (H, E) with dμ/dψ by eighth-order central differences of :func:`counts_direct`.

    Stencil weights (4/5, −1/5, 4/105, −1/280) at ±1..4 steps (Fornberg 1988, Math.
    Comp. 51:699, table 1); truncation error O(step⁸).
    """
    w = np.array([4 / 5, -1 / 5, 4 / 105, -1 / 280])
    E = setup.R_eye_head.shape[0]
    out = np.zeros((len(headings_deg), E))
    for h, psi in enumerate(np.radians(np.asarray(headings_deg, float))):
        mu = counts_direct(setup, psi).real
        dmu = sum(wk * (counts_direct(setup, psi + (k + 1) * step_rad).real
                        - counts_direct(setup, psi - (k + 1) * step_rad).real)
                  for k, wk in enumerate(w)) / step_rad
        v = setup.var_a * mu + setup.var_b
        out[h] = np.bincount(setup.pool_eye, dmu * dmu / v, E)
    return out


# ---------------------------------------------------------------------------
# public entry point
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class FisherResult:
    """Heading information over a set of headings.

    Attributes
    ----------
    headings_deg : (H,) yaw, degrees clockwise from north
    J_eye : (H, E) Fisher information per eye, rad⁻²
    eye_names : tuple of str
    min_count : float, the smallest mean count of any readout unit
    """

    headings_deg: np.ndarray
    J_eye: np.ndarray
    eye_names: tuple
    min_count: float

    @property
    def J(self) -> np.ndarray:
        """(H,) layout total, rad⁻² (eyes' counts are independent)."""
        return self.J_eye.sum(axis=1)

    @staticmethod
    def _crb(J):
        with np.errstate(divide="ignore"):
            return np.degrees(1.0 / np.sqrt(J))

    @property
    def crb_deg(self) -> np.ndarray:
        """(H,) Cramér–Rao bound on heading error, degrees (inf where J = 0)."""
        return self._crb(self.J)

    @property
    def crb_eye_deg(self) -> np.ndarray:
        return self._crb(self.J_eye)

    @property
    def mean_crb_deg(self) -> float:
        return float(np.mean(self.crb_deg))

    @property
    def rms_crb_deg(self) -> float:
        """sqrt of the heading-averaged variance bound, degrees."""
        with np.errstate(divide="ignore"):
            return float(np.degrees(np.sqrt(np.mean(1.0 / self.J))))


def fisher_information(field, layout, response, mosaic, counts, headings_deg=None,
                       pitch_deg=0.0, roll_deg=0.0, product="singlet", luminance=None,
                       backend="numba") -> FisherResult:
    """Fisher information about heading, per eye and for the layout.

    Parameters
    ----------
    field : FieldVector
    layout : Layout
    response : response object (axial, or full: its axial average)
    mosaic : Mosaic
    counts : CountModel
    headings_deg : (H,) yaw angles, degrees; default 0, 1, ..., 359
    pitch_deg, roll_deg : head pitch and roll held fixed while yaw varies
    product : "singlet" or "triplet"
    luminance : optional (N,) per-receptor linear luminance
    backend : "numba" or "numpy"

    Returns
    -------
    FisherResult
    """
    if headings_deg is None:
        headings_deg = np.arange(360.0)
    hd = np.atleast_1d(np.asarray(headings_deg, float))
    if hd.ndim != 1 or hd.size == 0 or not np.all(np.isfinite(hd)):
        raise MagretinaError("headings_deg must be a non-empty list of finite angles in degrees")
    st = make_setup(field, layout, response, mosaic, counts, pitch_deg, roll_deg, product,
                    luminance)
    if backend == "numpy":
        J, mn = fisher_numpy(st, hd)
    elif backend == "numba":
        b_eye, db_eye = field_eye_vs_heading(st.b_world_unit, st.R_eye_head, st.M_world_head0,
                                             np.radians(hd))
        J = np.empty((hd.size, st.R_eye_head.shape[0]))
        mn = np.empty(hd.size)
        fisher_kernel(b_eye, db_eye, st.axes, st.eye_start, st.amp, st.pool, st.pool_eye,
                      st.pooled, st.coef, st.gain, st.var_a, st.var_b, J, mn)
    else:
        raise MagretinaError(f"backend = {backend!r}: allowed numba, numpy")
    if np.min(mn) < 0:
        raise MagretinaError(f"gain = {counts.gain:g} makes some mean counts negative "
                             f"(1 + gain·m < 0 for the most negative modulation m); lower the gain")
    return FisherResult(hd, J, st.eye_names, float(np.min(mn)))


__all__ = ["fisher_information", "FisherResult", "make_setup", "derivative_lut",
           "field_eye_vs_heading", "hermite_coefficients", "HERMITE_SIZE", "fisher_numpy", "fisher_complex_step",
           "fisher_finite_difference", "counts_numpy", "counts_direct", "hermite_numpy"]
