"""Fisher information about heading carried by a receptor mosaic, and its Cramér–Rao bound.

For readout units k (receptors, or pools of them) with mean counts μ_k(ψ) and noise
variance v_k = a·μ_k + b (Poisson: a = 1, b = 0),

    J(ψ) = Σ_k μ_k'(ψ)² / v_k,          σ_ψ ≥ 1/√J   (Cramér–Rao)

with ψ the yaw (heading) in radians and ' = d/dψ.  The field in the head frame is
b_head(ψ) = Mᵀ R_z(−ψ) b_world (M the pitch–roll part of the pose), differentiated
analytically through the rotation.  Each receptor's signal follows its eye's
alignment hypothesis with the maths of :func:`renderer.kernels.signal_numpy`:

* axial modes (normal, chief ray, tilt, disorder, full-frame with random in-plane
  angle): s = f_e(a · b_eye) with f_e the eye's own averaged response.  Tilt and
  disorder scale the Legendre coefficients of the response by P_l(cos γ) or ⟨P_l⟩,
  so f_e is again a Legendre series and its derivative is exact
  (:func:`eye_axial_response`).  f_e is a cubic Hermite interpolant with nodal
  values f and slopes f', one table per distinct eye response;
* ratio: s = f(a · b)/f(a_B · b), population B's axis a_B built from the meridian
  frame as the kernels do; the quotient rule on the same Hermite tables (exact);
* full frame with the in-plane reference on the meridian or fixed: s = F(C b) with
  C the receptor's molecular frame.  C b is linear in (cos ψ, sin ψ, 1) and a
  response of harmonic degree ≤ L is a polynomial of degree L on the sphere, so
  s(ψ) is a trigonometric polynomial of degree ≤ L: sampled at 2K + 1 equally spaced
  headings (K ≥ L) its Fourier series is exact, derivative included
  (:func:`frame_spectrum`).  Responses of unknown degree double K until the
  spectrum's upper half falls below 1e-11 of the signal (the stated error bound).

The modulation m = s/⟨s⟩ − 1 is normalised by the mean over all receptors of the
layout at the same heading, whose derivative is included.  :func:`counts_direct`
evaluates the same model without tables or spectra (complex headings for complex
steps where the response accepts them), :func:`fisher_finite_difference` differences
it.  numba kernel for layouts whose eyes are all axial (the fast path), NumPy for the
rest; this module does no plotting or I/O.

Alignment hypotheses: :func:`make_setup` builds each eye's receptor signal with the maths
of ``kernels.signal_numpy`` (receptor frames from ``kernels.receptor_frames_numpy``, so
eye movements keep receptors on the retina) and gives each eye a kind from its kernel
mode: ``KIND_AXIAL`` (normal, chief-ray, tilt, disorder, random in-plane angle: one
Hermite table per distinct eye response; tilt and disorder as the rescaled Legendre
series the renderer samples, other averaged tables through :class:`_TableAxial`),
``KIND_RATIO`` (quotient rule on the same tables) and ``KIND_FRAME`` (full-frame
meridian or fixed: the heading spectrum above).  A new kernel mode needs its kind here,
with its signal and derivative in :func:`receptor_signals` and :func:`counts_direct`;
tests/predict/test_alignment_modes.py builds every registered hypothesis from
``renderer.eye.alignment.examples()``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numba
from numba import njit, prange
from numpy.polynomial import legendre as npleg
from scipy.interpolate import CubicSpline

from .. import kernels, pipeline
from ..errors import MagretinaError
from ..eye.alignment import Alignment, Disorder, Tilt, axial_response
from ..eye.alignment.averaging import legendre_coefficients, tilt_factors, vmf_factors
from ..pose import Pose
from ..response.base import LUT_SIZE, lut_nodes
from ..response.legendre import Legendre
from ..response.tabulated import Tabulated

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
# per-eye responses
# ---------------------------------------------------------------------------

#: Per-eye signal kinds of a :class:`Setup`.
KIND_AXIAL, KIND_RATIO, KIND_FRAME = 0, 1, 2
KIND_NAMES = ("axial", "ratio", "full-frame")

#: Relative size of the upper half of a heading spectrum accepted as converged
#: (responses of unknown harmonic degree, see :func:`frame_spectrum`).
SPECTRUM_TOL = 1e-11
#: Largest heading-spectrum degree tried before giving up.
SPECTRUM_MAX_DEGREE = 256


class _TableAxial:
    """An axial response known only as a table on ``lut_nodes(n)`` (an alignment
    whose averaging this module does not know): a not-a-knot cubic spline through the
    table, value error O(h⁴·max|f⁗|), slope error O(h³·max|f⁗|), h = 2/(n − 1)."""

    axial = True

    def __init__(self, table):
        t = np.asarray(table, dtype=np.float64)
        self._spline = CubicSpline(lut_nodes(t.size), t)

    def __call__(self, c):
        return self._spline(np.clip(np.asarray(c, dtype=np.float64), -1.0, 1.0))

    def derivative(self, c):
        return self._spline(np.clip(np.asarray(c, dtype=np.float64), -1.0, 1.0), 1)


def eye_axial_response(alignment, response):
    """The axial response read along an eye's base receptor axis.

    Tilt γ with free rotation and von Mises–Fisher disorder multiply each Legendre
    coefficient c_l of the response (a full response: its in-plane average) by
    P_l(cos γ) or ⟨P_l⟩ = I_{l+½}(κ)/I_{½}(κ) (spherical-harmonic addition theorem;
    :mod:`renderer.eye.alignment.averaging`), so the result is the
    :class:`~renderer.response.Legendre` series with the scaled coefficients — the
    same series whose samples the renderer's table holds, with an exact derivative.
    Normal, chief-ray, ratio and random in-plane alignments read the response itself
    (its in-plane average if it is full).  An alignment of unknown kind that changes
    the table is read through its own table (:class:`_TableAxial`).
    """
    if isinstance(alignment, Tilt) and alignment.tilt_deg != 0.0:
        c = legendre_coefficients(response)
        return Legendre(c * tilt_factors(math.radians(alignment.tilt_deg), c.size - 1))
    if isinstance(alignment, Disorder):
        c = legendre_coefficients(response)
        return Legendre(c * vmf_factors(alignment.kappa, c.size - 1)[: c.size])
    if type(alignment).axial_lut is not Alignment.axial_lut and not isinstance(alignment, Tilt):
        return _TableAxial(alignment.axial_lut(response, LUT_SIZE))
    return axial_response(response)


def _direct_fn(r, product):
    """Table-free f (or 1 − f) of an axial response; complex-safe for Legendre series."""
    if isinstance(r, Legendre):
        coeffs = r.coeffs
        f = lambda c: npleg.legval(c, coeffs)  # noqa: E731
    else:
        f = r
    if product == "triplet":
        return lambda c: 1.0 - f(c)
    return f


# ---------------------------------------------------------------------------
# full-frame receptors: exact heading spectra
# ---------------------------------------------------------------------------

def _heading_w(b_world_unit, psi):
    """R_z(−ψ) b_world for headings ψ (M,) -> (M, 3) (see :func:`field_eye_vs_heading`)."""
    c, s = np.cos(psi), np.sin(psi)
    bx, by, bz = (float(x) for x in b_world_unit)
    return np.stack([c * bx + s * by, -s * bx + c * by, np.full_like(c, bz)], axis=-1)


def frame_spectrum(evaluate, mol, A_eye, b_world_unit, degree=None, tol=SPECTRUM_TOL):
    """Fourier coefficients in heading of full-frame receptor signals.

    Parameters
    ----------
    evaluate : callable, (K, 3) molecular-frame unit field directions -> (K,) signal
    mol : (n, 3, 3) rows x, y, z of each receptor's molecular frame, eye frame
    A_eye : (3, 3) R_eye_head Mᵀ of the eye (M the pitch–roll part of the pose)
    b_world_unit : (3,) unit field, NED
    degree : int or None
        Harmonic degree L of the response if known (``SphericalHarmonic.lmax``).
    tol : float

    Returns
    -------
    a : (n, K + 1) complex
        s_i(ψ) = Re[a_0 + 2 Σ_{k≥1} a_k e^{ikψ}] exactly for a response of degree
        ≤ K: C b(ψ) is linear in (cos ψ, sin ψ, 1), so a polynomial of degree L on
        the sphere becomes a trigonometric polynomial of degree ≤ L, which 2K + 1
        equally spaced samples determine (trigonometric interpolation; Trefethen 2000,
        Spectral Methods in MATLAB, ch. 3).  With ``degree`` given K = L + 1 and the
        extra coefficient is checked to vanish; otherwise K doubles from 8 until every
        coefficient above K/2 is below ``tol`` times the largest |s|, which bounds the
        derivative error by about 2Σ_{k>K/2} k|a_k| for a smooth response.
    """
    K = int(degree) + 1 if degree is not None else 8
    while True:
        M = 2 * K + 1
        psi = 2.0 * math.pi * np.arange(M) / M
        b_eye = _heading_w(b_world_unit, psi) @ np.asarray(A_eye).T          # (M, 3)
        b_mol = np.einsum("nij,mj->nmi", mol, b_eye)                          # (n, M, 3)
        vals = np.asarray(evaluate(b_mol.reshape(-1, 3)), dtype=np.float64).reshape(mol.shape[0], M)
        if not np.all(np.isfinite(vals)):
            raise MagretinaError("the full-frame response gives non-finite values for some field "
                                 "direction")
        a = np.fft.rfft(vals, axis=1) / M
        scale = max(float(np.max(np.abs(vals))) if vals.size else 0.0, 1e-300)
        lo = int(degree) if degree is not None else K // 2
        tail = float(np.max(np.abs(a[:, lo + 1:]))) if a.shape[1] > lo + 1 and vals.size else 0.0
        if tail <= tol * scale:
            return np.ascontiguousarray(a)
        if degree is not None:  # not band-limited after all: fall back to the doubling rule
            degree = None
            K = max(8, K)
        K *= 2
        if K > SPECTRUM_MAX_DEGREE:
            raise MagretinaError(
                f"full-frame response: its heading spectrum has not converged at degree "
                f"{SPECTRUM_MAX_DEGREE} (relative tail {tail / scale:.1e} > {tol:g}); the response "
                f"is too rough for heading derivatives — use a smoother (band-limited) response")


def spectrum_eval(a, psi):
    """(s, ds/dψ) of Fourier coefficients ``a`` (n, K+1) at headings ψ (H,) -> (H, n) each."""
    k = np.arange(a.shape[1])
    w = np.where(k == 0, 1.0, 2.0)
    E = np.exp(1j * np.outer(np.atleast_1d(psi), k)) * w                  # (H, K+1)
    s = (E @ a.T).real
    ds = ((E * (1j * k)) @ a.T).real
    return s, ds


# ---------------------------------------------------------------------------
# the prepared problem
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class Setup:
    """Everything the Fisher kernels read, for one field, layout, response, mosaic and counts.

    Receptors are grouped by eye (``order``: setup row j is mosaic receptor
    ``order[j]``).  ``lut``/``dlut`` (K, L) and ``coef`` (K, L−1, 4) are the Hermite
    tables, eye e reads row ``eye_row[e]``; ``eye_kind[e]`` is KIND_AXIAL, KIND_RATIO
    or KIND_FRAME; ``axes`` (N, 3) base receptor axes, ``axes_b`` (N, 3) ratio
    population B axes (0 elsewhere), ``mol`` (N, 3, 3) molecular frames of full-frame
    receptors (rows x, y, z; 0 elsewhere), ``spectra`` per eye the
    :func:`frame_spectrum` coefficients of its full-frame receptors (else None),
    ``direct`` per eye the table-free signal function (of cos θ, or of
    molecular-frame field directions for full-frame eyes).
    """

    b_world_unit: np.ndarray
    R_eye_head: np.ndarray
    M_world_head0: np.ndarray
    lut: np.ndarray
    dlut: np.ndarray
    coef: np.ndarray
    eye_row: np.ndarray
    eye_kind: np.ndarray
    axes: np.ndarray
    axes_b: np.ndarray
    mol: np.ndarray
    spectra: tuple
    direct: tuple
    order: np.ndarray
    eye_index: np.ndarray
    eye_start: np.ndarray
    amp: np.ndarray
    pool: np.ndarray
    pool_eye: np.ndarray
    gain: float
    var_a: float
    var_b: float
    eye_names: tuple
    zero_field: bool

    @property
    def n_pools(self):
        return int(self.pool_eye.shape[0])

    @property
    def pooled(self):
        return self.n_pools != self.axes.shape[0]

    @property
    def all_axial(self) -> bool:
        return bool(np.all(self.eye_kind == KIND_AXIAL))

    def eye_slice(self, e) -> slice:
        return slice(int(self.eye_start[e]), int(self.eye_start[e + 1]))


def _check_mosaic(layout, mosaic):
    names = tuple(e.name for e in layout.eyes)
    if tuple(mosaic.eye_names) != names:
        raise MagretinaError(f"mosaic: built for eyes {', '.join(mosaic.eye_names)} but the layout "
                             f"has {', '.join(names)}; build the mosaic on this layout")
    for k, eye in enumerate(layout.eyes):
        u = mosaic.dirs_eye[mosaic.eye_index == k]
        if u.size and not np.all(eye.visible(u)):
            raise MagretinaError(f"mosaic: some receptors of eye {eye.name!r} lie outside its field "
                                 f"of view in this layout (the mosaic was built on another eye "
                                 f"geometry); build the mosaic on this layout")


def make_setup(field, layout, response, mosaic, counts, pitch_deg=0.0, roll_deg=0.0,
               product="singlet", luminance=None, eye_offsets=None) -> Setup:
    """Pack the inputs of :func:`fisher_information` and friends.

    ``luminance`` (N,) optionally gives each receptor's linear scene luminance (held
    fixed while heading varies, so the scene's own heading cues are excluded);
    default ``counts.luminance`` everywhere.  ``eye_offsets`` moves the eyes as in
    :func:`renderer.pipeline.prepare`; receptors keep their place on the retina.
    """
    if eye_offsets:
        layout = layout.moved(eye_offsets)
    _check_mosaic(layout, mosaic)
    inputs = pipeline.prepare(field, Pose(0.0, pitch_deg, roll_deg), layout, response, product)
    zero = inputs.total_T == 0.0
    b = np.asarray(field.ned_T, float)
    b_unit = b / inputs.total_T if not zero else np.array([0.0, 0.0, 1.0])
    M0 = Pose(0.0, pitch_deg, roll_deg).R_world_head
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
    a_var, b_var = counts.noise.variance_coeffs()
    # receptors grouped by eye (stable), so the kernel streams each eye's rows with its
    # field held in registers; pool ids are unchanged, so per-unit results are too
    order = np.argsort(mosaic.eye_index, kind="stable")
    eye_index = np.ascontiguousarray(mosaic.eye_index[order], dtype=np.int64)
    E = len(layout.eyes)
    eye_start = np.searchsorted(eye_index, np.arange(E + 1)).astype(np.int64)
    u = np.asarray(mosaic.dirs_eye, float)[order]
    axes = np.zeros((N, 3))
    axes_b = np.zeros((N, 3))
    mol = np.zeros((N, 3, 3))
    luts, dluts = [], []
    eye_row = np.zeros(E, np.int64)
    eye_kind = np.zeros(E, np.int64)
    spectra, direct = [None] * E, [None] * E
    nodes = lut_nodes(HERMITE_SIZE)

    def add_table(lut, dlut):
        for k, (l0, d0) in enumerate(zip(luts, dluts)):
            if np.array_equal(l0, lut) and np.array_equal(d0, dlut):
                return k
        luts.append(np.ascontiguousarray(lut, dtype=np.float64))
        dluts.append(np.ascontiguousarray(dlut, dtype=np.float64))
        return len(luts) - 1

    for e, eye in enumerate(layout.eyes):
        sl = slice(int(eye_start[e]), int(eye_start[e + 1]))
        p = inputs.eye_params[e]
        a, e1, e2 = kernels.receptor_frames_numpy(u[sl], p)
        axes[sl] = a
        mode = int(p[kernels.P_MODE])
        if zero:
            # as pipeline.prepare: no direction to respond to; the renderer's constant
            probe = (inputs.R_eye_head[e].T @ np.array([1.0, 0.0, 0.0]))[None, :]
            const = float(kernels.signal_numpy(probe, inputs.R_eye_head, inputs.eye_params,
                                               inputs.b_eye, inputs.lut, pick=e,
                                               cubes=inputs.cubes)[0])
            eye_row[e] = add_table(np.full(HERMITE_SIZE, const), np.zeros(HERMITE_SIZE))
            direct[e] = (lambda k: lambda c: np.full(np.shape(c), k) + 0 * c)(const)
            continue
        if mode in (kernels.MODE_AXIAL, kernels.MODE_RATIO):
            r = eye_axial_response(eye.alignment, response)
            lut = np.asarray(r(nodes), dtype=np.float64)
            if not np.all(np.isfinite(lut)):
                raise MagretinaError("the response gives non-finite values somewhere in "
                                     "cos θ ∈ [-1, 1]")
            if product == "triplet":
                lut = 1.0 - lut
            eye_row[e] = add_table(lut, derivative_lut(r, product, HERMITE_SIZE))
            direct[e] = _direct_fn(r, product)
            if mode == kernels.MODE_RATIO:
                eye_kind[e] = KIND_RATIO
                axes_b[sl] = kernels.mode_axes_numpy(p, a, e1, e2)[1]
            continue
        # full frame, in-plane reference on the meridian or fixed: the molecular axes
        mol[sl] = np.stack(kernels.mode_axes_numpy(p, a, e1, e2), axis=1)
        full = response

        def evaluate(d, full=full):
            v = np.asarray(full.evaluate_dirs(d), dtype=np.float64)
            return 1.0 - v if product == "triplet" else v

        eye_kind[e] = KIND_FRAME
        direct[e] = evaluate
        A_eye = inputs.R_eye_head[e] @ M0.T
        spectra[e] = frame_spectrum(evaluate, mol[sl], A_eye, b_unit,
                                    getattr(response, "lmax", None))
    if not luts:  # only full-frame eyes: a placeholder table nobody reads
        add_table(np.zeros(HERMITE_SIZE), np.zeros(HERMITE_SIZE))
    lut_s, dlut_s = np.stack(luts), np.stack(dluts)
    coef = np.ascontiguousarray(np.stack([hermite_coefficients(l0, d0)
                                          for l0, d0 in zip(luts, dluts)]))
    return Setup(b_unit, inputs.R_eye_head, M0, lut_s, dlut_s, coef, eye_row, eye_kind,
                 np.ascontiguousarray(axes), np.ascontiguousarray(axes_b),
                 np.ascontiguousarray(mol), tuple(spectra), tuple(direct), order, eye_index,
                 eye_start, np.ascontiguousarray(amp[order]),
                 np.ascontiguousarray(mosaic.pool[order], dtype=np.int64),
                 np.ascontiguousarray(mosaic.pool_eye, dtype=np.int64), counts.gain, float(a_var),
                 float(b_var), mosaic.eye_names, zero)


# ---------------------------------------------------------------------------
# numba kernel (axial eyes)
# ---------------------------------------------------------------------------

# Receptors per chunk of the kernel's vectorised loops: the chunk's scratch rows (index,
# fraction, derivative factor, terms) stay in L1.
_CHUNK = 512


@njit(cache=True, error_model="numpy")
def _hermite_index(axes, j0, n, bx, by, bz, dx, dy, dz, n1, jv, tv, dv):
    """Vectorised part of the cubic Hermite lookup on linspace(−1, 1, n1 + 1) at
    c = a·b for receptors j0 .. j0+n−1: interval jv, fraction tv, and the derivative
    factor dv = a·db (no table reads, so LLVM vectorises it; the same operations as
    :func:`hermite_numpy`)."""
    inv_h = 0.5 * n1
    for i in range(n):
        ax = axes[j0 + i, 0]
        ay = axes[j0 + i, 1]
        az = axes[j0 + i, 2]
        x = (ax * bx + ay * by + az * bz + 1.0) * inv_h
        x = min(max(x, 0.0), float(n1))
        j = min(int(x), n1 - 1)
        jv[i] = j
        tv[i] = x - j
        dv[i] = ax * dx + ay * dy + az * dz


@njit(cache=True, error_model="numpy")
def _unit_terms(amp, sv, gv, inv, k2, gain, var_a, var_b, q, m, j0, n):
    """Vectorised per-receptor terms of unpooled units j0 .. j0+n−1: mean count m and
    Fisher term q = (dμ/dψ)² / var (0 where the variance is not positive)."""
    for i in range(n):
        A = amp[j0 + i]
        s = sv[j0 + i]
        mu = A * (1.0 + gain * (s * inv - 1.0))
        dmu = A * gain * (gv[j0 + i] * inv - s * k2)
        v = var_a * mu + var_b
        m[i] = mu
        q[i] = dmu * dmu / v if v > 0.0 else 0.0


def _threads():
    return numba.get_num_threads()


def fisher_work(n_receptors, threads=None) -> np.ndarray:
    """Scratch rows for :func:`fisher_kernel`: (T, 2, N) float64, T = numba's thread count
    (or ``threads``).  Allocated once by the caller and reused for every call, so the
    kernel touches no fresh pages per heading."""
    if threads is None:
        threads = numba.get_num_threads()
    return np.empty((max(1, int(threads)), 2, int(n_receptors)))


@njit(parallel=True, cache=True)
def fisher_kernel(b_eye, db_eye, axes, eye_start, amp, pool, pool_eye, pooled, coef, eye_row,
                  gain, var_a, var_b, out_J, out_min_mu, work):
    """Fisher information per heading and eye, for eyes whose receptors are all axial.

    b_eye, db_eye (H, E, 3); axes (N, 3) with the receptors of eye e in rows
    eye_start[e]:eye_start[e+1]; pool (N,) int64; amp (N,) counts at m = 0; pool_eye
    (P,); ``pooled`` False means every receptor is its own unit; coef (K, L−1, 4)
    the Hermite coefficients (:func:`hermite_coefficients`) with eye e reading
    ``coef[eye_row[e]]``.  Fills out_J (H, E) in rad⁻² and out_min_mu (H,) with the
    smallest mean count.  ``work`` (T, 2, N) float64 scratch (:func:`fisher_work`); its
    T rows are the parallel lanes, lane t doing headings t, t + T, ...

    Per heading, one pass over the receptors evaluates the table once per receptor
    (signal s and g = ds/dψ into per-thread rows, summed for the layout mean ⟨s⟩ and
    its derivative), a second pass forms the counts from those rows.  The work per
    receptor is split into vectorised chunk loops (indices; terms) and short scalar
    loops (table reads; the sums, kept in receptor order so results do not depend on
    the chunking: bitwise equal to evaluating the table twice, as before).
    """
    H = b_eye.shape[0]
    E = b_eye.shape[1]
    N = axes.shape[0]
    P = pool_eye.shape[0]
    CH = _CHUNK
    T = work.shape[0]
    for lane in prange(T):
        sv = work[lane, 0]
        gv = work[lane, 1]
        jv = np.empty(CH, np.int64)
        tv = np.empty(CH)
        dv = np.empty(CH)
        q = np.empty(CH)
        m = np.empty(CH)
        for h in range(lane, H, T):
            _fisher_heading(h, b_eye, db_eye, axes, eye_start, amp, pool, pool_eye, pooled,
                            coef, eye_row, gain, var_a, var_b, out_J, out_min_mu, sv, gv,
                            jv, tv, dv, q, m)


@njit(cache=True, inline="always")
def _fisher_heading(h, b_eye, db_eye, axes, eye_start, amp, pool, pool_eye, pooled, coef,
                    eye_row, gain, var_a, var_b, out_J, out_min_mu, sv, gv, jv, tv, dv, q, m):
    """One heading of :func:`fisher_kernel` with the lane's scratch rows."""
    E = b_eye.shape[1]
    N = axes.shape[0]
    P = pool_eye.shape[0]
    CH = _CHUNK
    S = 0.0
    dS = 0.0
    for e in range(E):
        cf = coef[eye_row[e]]
        n1 = cf.shape[0]
        inv_h = 0.5 * n1
        bx, by, bz = b_eye[h, e, 0], b_eye[h, e, 1], b_eye[h, e, 2]
        dx, dy, dz = db_eye[h, e, 0], db_eye[h, e, 1], db_eye[h, e, 2]
        for c0 in range(eye_start[e], eye_start[e + 1], CH):
            n = min(CH, eye_start[e + 1] - c0)
            _hermite_index(axes, c0, n, bx, by, bz, dx, dy, dz, n1, jv, tv, dv)
            for i in range(n):
                j = jv[i]
                t = tv[i]
                a0 = cf[j, 0]
                a1 = cf[j, 1]
                a2 = cf[j, 2]
                a3 = cf[j, 3]
                s = ((a3 * t + a2) * t + a1) * t + a0
                g = (((3.0 * a3 * t + 2.0 * a2) * t + a1) * inv_h) * dv[i]
                sv[c0 + i] = s
                gv[c0 + i] = g
                S += s
                dS += g
    S /= N
    dS /= N
    inv = 1.0 / S
    k2 = dS * inv * inv
    mn = np.inf
    mu_p = np.zeros(P if pooled else 0)
    dmu_p = np.zeros(P if pooled else 0)
    for e in range(E):
        acc = 0.0
        if pooled:
            for i in range(eye_start[e], eye_start[e + 1]):
                A = amp[i]
                s = sv[i]
                mu_p[pool[i]] += A * (1.0 + gain * (s * inv - 1.0))
                dmu_p[pool[i]] += A * gain * (gv[i] * inv - s * k2)
        else:
            for c0 in range(eye_start[e], eye_start[e + 1], CH):
                n = min(CH, eye_start[e + 1] - c0)
                _unit_terms(amp, sv, gv, inv, k2, gain, var_a, var_b, q, m, c0, n)
                for i in range(n):
                    acc += q[i]
                    mn = min(mn, m[i])
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
# NumPy path (every mode) and references
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


def receptor_signals(setup: Setup, headings_rad):
    """Per-receptor signal s and ds/dψ at headings ψ (H,), each (H, N), setup order.

    s is what the renderer's kernels give at the receptor's direction with its eye
    picked (up to their table interpolation); ``s[:, j]`` belongs to mosaic receptor
    ``setup.order[j]``.
    """
    psi = np.atleast_1d(np.asarray(headings_rad, float))
    b, db = field_eye_vs_heading(setup.b_world_unit, setup.R_eye_head, setup.M_world_head0, psi)
    N = setup.axes.shape[0]
    s = np.empty((psi.size, N))
    ds = np.empty((psi.size, N))
    for e in range(setup.R_eye_head.shape[0]):
        sl = setup.eye_slice(e)
        kind = setup.eye_kind[e]
        if kind == KIND_FRAME:
            s[:, sl], ds[:, sl] = spectrum_eval(setup.spectra[e], psi)
            continue
        cf = setup.coef[setup.eye_row[e]]
        a = setup.axes[sl]
        f, fp = hermite_numpy(cf, b[:, e] @ a.T)
        dc = db[:, e] @ a.T
        if kind == KIND_AXIAL:
            s[:, sl], ds[:, sl] = f, fp * dc
        else:
            ab = setup.axes_b[sl]
            g, gp = hermite_numpy(cf, b[:, e] @ ab.T)
            dcb = db[:, e] @ ab.T
            s[:, sl] = f / g
            ds[:, sl] = (fp * dc * g - f * gp * dcb) / (g * g)
    return s, ds


def _pool_rows(setup, x):
    if not setup.pooled:
        return x
    P = setup.n_pools
    return np.stack([np.bincount(setup.pool, row, P) for row in x])


def unit_counts(setup: Setup, headings_rad):
    """Mean counts per readout unit and their yaw derivative, each (H, P) (counts, per rad)."""
    s, ds = receptor_signals(setup, headings_rad)
    S = s.mean(axis=1, keepdims=True)
    dS = ds.mean(axis=1, keepdims=True)
    mu = setup.amp * (1.0 + setup.gain * (s / S - 1.0))
    dmu = setup.amp * setup.gain * (ds / S - s * dS / S ** 2)
    return _pool_rows(setup, mu), _pool_rows(setup, dmu)


def counts_numpy(setup: Setup, heading_rad):
    """Mean counts per readout unit and their yaw derivative at one heading: (μ (P,), dμ/dψ (P,))."""
    mu, dmu = unit_counts(setup, [heading_rad])
    return mu[0], dmu[0]


def fisher_numpy(setup: Setup, headings_deg):
    """J (H, E) rad⁻² and min μ (H,) for any alignment modes (NumPy; twin of the kernel)."""
    psi = np.radians(np.atleast_1d(np.asarray(headings_deg, float)))
    E = setup.R_eye_head.shape[0]
    J = np.zeros((psi.size, E))
    mn = np.empty(psi.size)
    step = max(1, int(2_000_000 // max(setup.axes.shape[0], 1)))
    for h0 in range(0, psi.size, step):
        mu, dmu = unit_counts(setup, psi[h0:h0 + step])
        v = setup.var_a * mu + setup.var_b
        w = np.where(v > 0, dmu * dmu / np.where(v > 0, v, 1.0), 0.0)
        for k in range(mu.shape[0]):
            J[h0 + k] = np.bincount(setup.pool_eye, w[k], E)
        mn[h0:h0 + step] = mu.min(axis=1)
    return J, mn


def counts_direct(setup: Setup, heading_rad):
    """Mean counts per unit at one heading, evaluating the response itself (no table).

    ``heading_rad`` may be complex: with a response that is analytic in cos θ (a
    Legendre series) Im μ(ψ + iε)/ε is the complex-step derivative (Squire & Trapp
    1998, SIAM Rev. 40:110), free of cancellation error.  Full-frame eyes evaluate
    the response at molecular-frame field directions (real headings only).
    """
    b_eye, _ = field_eye_vs_heading(setup.b_world_unit, setup.R_eye_head, setup.M_world_head0,
                                    np.atleast_1d(heading_rad))
    b = b_eye[0]
    complex_step = np.iscomplexobj(b)
    parts = []
    for e in range(setup.R_eye_head.shape[0]):
        sl = setup.eye_slice(e)
        fn = setup.direct[e]
        kind = setup.eye_kind[e]
        if kind == KIND_FRAME:
            if complex_step:
                raise MagretinaError("complex step is not available for full-frame eyes (their "
                                     "response takes real directions); use "
                                     "fisher_finite_difference")
            parts.append(fn(setup.mol[sl] @ b[e]))
        elif kind == KIND_RATIO:
            parts.append(fn(setup.axes[sl] @ b[e]) / fn(setup.axes_b[sl] @ b[e]))
        else:
            parts.append(fn(setup.axes[sl] @ b[e]))
    s = np.concatenate(parts) if parts else np.zeros(0)
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
                       backend="numba", eye_offsets=None) -> FisherResult:
    """Fisher information about heading, per eye and for the layout.

    Parameters
    ----------
    field : FieldVector
    layout : Layout
    response : response object (axial, or full: read as each eye's alignment says)
    mosaic : Mosaic
    counts : CountModel
    headings_deg : (H,) yaw angles, degrees; default 0, 1, ..., 359
    pitch_deg, roll_deg : head pitch and roll held fixed while yaw varies
    product : "singlet" or "triplet"
    luminance : optional (N,) per-receptor linear luminance
    backend : "numba" or "numpy"
        numba runs when every eye is axial (normal, chief ray, tilt, disorder,
        random in-plane angle); layouts with ratio or full-frame eyes use NumPy.
    eye_offsets : mapping, optional
        Eye movements (see :func:`renderer.pipeline.prepare`).

    Returns
    -------
    FisherResult
    """
    if headings_deg is None:
        headings_deg = np.arange(360.0)
    hd = np.atleast_1d(np.asarray(headings_deg, float))
    if hd.ndim != 1 or hd.size == 0 or not np.all(np.isfinite(hd)):
        raise MagretinaError("headings_deg must be a non-empty list of finite angles in degrees")
    if backend not in ("numba", "numpy"):
        raise MagretinaError(f"backend = {backend!r}: allowed numba, numpy")
    st = make_setup(field, layout, response, mosaic, counts, pitch_deg, roll_deg, product,
                    luminance, eye_offsets)
    if backend == "numpy" or not st.all_axial:
        J, mn = fisher_numpy(st, hd)
    elif backend == "numba":
        b_eye, db_eye = field_eye_vs_heading(st.b_world_unit, st.R_eye_head, st.M_world_head0,
                                             np.radians(hd))
        J = np.empty((hd.size, st.R_eye_head.shape[0]))
        mn = np.empty(hd.size)
        fisher_kernel(b_eye, db_eye, st.axes, st.eye_start, st.amp, st.pool, st.pool_eye,
                      st.pooled, st.coef, st.eye_row, st.gain, st.var_a, st.var_b, J, mn,
                      fisher_work(st.axes.shape[0], min(hd.size, _threads())))
    if np.min(mn) < 0:
        raise MagretinaError(f"gain = {counts.gain:g} makes some mean counts negative "
                             f"(1 + gain·m < 0 for the most negative modulation m); lower the gain")
    return FisherResult(hd, J, st.eye_names, float(np.min(mn)))


__all__ = ["fisher_information", "FisherResult", "make_setup", "derivative_lut",
           "field_eye_vs_heading", "hermite_coefficients", "HERMITE_SIZE", "fisher_numpy",
           "fisher_complex_step", "fisher_finite_difference", "counts_numpy", "counts_direct",
           "hermite_numpy", "receptor_signals", "unit_counts", "eye_axial_response",
           "frame_spectrum", "spectrum_eval", "KIND_AXIAL", "KIND_RATIO", "KIND_FRAME"]
