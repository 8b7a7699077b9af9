"""Full-sphere responses stored as real spherical-harmonic coefficients.

f(d) = Σ_{l ≤ L} Σ_{|m| ≤ l} c_lm Y_lm(d) for unit field directions d in the molecular
frame (z = receptor axis, polar angle θ from z, azimuth φ = atan2(y, x) from x).  The
real harmonics are orthonormal on the unit sphere and carry no Condon–Shortley phase:
Y_l0 = Y_l^0, Y_lm = √2 (−1)^m Re Y_l^m (m > 0), Y_l,−m = √2 (−1)^m Im Y_l^m (m > 0),
built from ``scipy.special.sph_harm_y_all``.  Coefficients are stored for every
(l, m) in the flat order index = l² + l + m; radical-pair yields have even l only
(field reversal), hence :attr:`is_even`.

Orientational averages are exact operations on the coefficients: free rotation
about molecular z keeps the m = 0 terms (:meth:`axial_average`, a Legendre series);
von Mises–Fisher disorder multiplies degree l by I_{l+1/2}(κ)/I_{1/2}(κ) (Funk–Hecke);
rotations are projected with a Lebedev rule exact for degree 2L, so they are exact
to round-off.  Fitting tables from samples: :func:`fit_quadrature`.  Rendering uses
:meth:`SphericalHarmonic.sphere_lut` with :func:`interp_sphere_lut` (bilinear) or
:meth:`evaluate_dirs`.  This module knows nothing about spin dynamics
(:mod:`renderer.response.spin_table` builds tables from radical pairs).
"""

from __future__ import annotations

import numpy as np
from scipy.integrate import lebedev_rule
from scipy.optimize import minimize
from scipy.spatial.transform import Rotation
from scipy.special import ive, sph_harm_y_all

from ..errors import MagretinaError
from .legendre import Legendre

#: Orders (exact polynomial degree) of the Lebedev rules scipy provides.
LEBEDEV_ORDERS = (3, 5, 7, 9, 11, 13, 15, 17, 19, 21, 23, 25, 27, 29, 31, 35, 41, 47, 53, 59,
                  65, 71, 77, 83, 89, 95, 101, 107, 113, 119, 125, 131)


def n_coeffs(lmax: int) -> int:
    """(L + 1)², the number of real harmonics up to degree L."""
    return (int(lmax) + 1) ** 2


def lm_index(l, m):
    """Flat index l² + l + m of (l, m)."""
    return l * l + l + m


def degrees(lmax: int) -> np.ndarray:
    """Degree l of every flat coefficient index, shape ((L+1)²,)."""
    return np.concatenate([np.full(2 * l + 1, l) for l in range(int(lmax) + 1)])


def orders(lmax: int) -> np.ndarray:
    """Order m of every flat coefficient index, shape ((L+1)²,)."""
    return np.concatenate([np.arange(-l, l + 1) for l in range(int(lmax) + 1)])


def lebedev_order_for(degree: int) -> int:
    """Smallest available Lebedev order integrating polynomials of ``degree`` exactly."""
    for o in LEBEDEV_ORDERS:
        if o >= degree:
            return o
    raise MagretinaError(f"no Lebedev rule integrates degree {degree} exactly (largest order "
                         f"{LEBEDEV_ORDERS[-1]}); use a smaller harmonic degree (l_max <= "
                         f"{LEBEDEV_ORDERS[-1] // 2})")


def lebedev_grid(order: int):
    """Lebedev nodes (N, 3) on the unit sphere and weights (N,) summing to 1."""
    x, w = lebedev_rule(int(order))
    return np.ascontiguousarray(x.T), w / w.sum()


def dirs_to_angles(dirs):
    """Polar angle θ from +z and azimuth φ = atan2(y, x) of direction vectors (N, 3)."""
    d = np.asarray(dirs, dtype=np.float64)
    r = np.linalg.norm(d, axis=-1)
    if np.any(r == 0) or not np.all(np.isfinite(r)):
        raise MagretinaError("direction vectors must be finite and non-zero")
    theta = np.arccos(np.clip(d[..., 2] / r, -1.0, 1.0))
    phi = np.arctan2(d[..., 1], d[..., 0])
    return theta, phi


def angles_to_dirs(theta, phi):
    """Unit vectors (..., 3) from polar angle θ and azimuth φ (radians)."""
    st = np.sin(theta)
    return np.stack(np.broadcast_arrays(st * np.cos(phi), st * np.sin(phi), np.cos(theta)), axis=-1)


def real_sph_harm(lmax: int, dirs) -> np.ndarray:
    """Real orthonormal spherical harmonics at directions, shape (N, (L+1)²).

    Parameters
    ----------
    lmax : int
        Highest degree L.
    dirs : array_like, shape (N, 3)
        Directions (need not be normalised), molecular frame.
    """
    theta, phi = dirs_to_angles(np.atleast_2d(dirs))
    lmax = int(lmax)
    y = sph_harm_y_all(lmax, lmax, theta, phi)  # (L+1, 2L+1, N), m index wraps for m < 0
    out = np.empty((theta.size, n_coeffs(lmax)))
    for l in range(lmax + 1):
        out[:, lm_index(l, 0)] = y[l, 0].real
        for m in range(1, l + 1):
            sign = np.sqrt(2.0) * (-1) ** m
            out[:, lm_index(l, m)] = sign * y[l, m].real
            out[:, lm_index(l, -m)] = sign * y[l, m].imag
    return out


def fit_quadrature(lmax, nodes, weights, values):
    """Coefficients by quadrature projection c_lm = 4π Σ_i w_i f_i Y_lm(x_i).

    Exact for a band-limited f of degree ≤ L when the rule integrates degree 2L
    exactly (Lebedev order ≥ 2L).  ``weights`` sum to 1.

    Returns
    -------
    ndarray, shape ((L+1)²,)
    """
    y = real_sph_harm(lmax, nodes)
    return 4.0 * np.pi * (y.T @ (np.asarray(weights) * np.asarray(values, dtype=np.float64)))


def sphere_lut_nodes(n_theta: int, n_phi: int):
    """Nodes of :meth:`SphericalHarmonic.sphere_lut`.

    θ_i = linspace(0, π, n_theta)[i] (poles included) and φ_j = linspace(−π, π, n_phi)[j]
    with endpoint=True, so column n_phi − 1 repeats column 0 (φ = π ≡ −π) and a
    bilinear lookup never wraps.  Node spacing h_θ = π/(n_theta − 1), h_φ = 2π/(n_phi − 1).
    """
    if int(n_theta) < 2 or int(n_phi) < 3:
        raise MagretinaError(f"sphere lookup table needs n_theta >= 2 and n_phi >= 3, got "
                             f"{n_theta}, {n_phi}")
    return np.linspace(0.0, np.pi, int(n_theta)), np.linspace(-np.pi, np.pi, int(n_phi))


def interp_sphere_lut(lut, dirs_mol):
    """Bilinear lookup in a (n_theta, n_phi) table on :func:`sphere_lut_nodes`.

    The plain-NumPy reference for rendering kernels.  Error ≤ (h_θ² max|f_θθ| +
    h_φ² max|f_φφ|)/8.

    Parameters
    ----------
    lut : ndarray, shape (n_theta, n_phi)
    dirs_mol : ndarray, shape (N, 3)

    Returns
    -------
    ndarray, shape (N,)
    """
    lut = np.asarray(lut, dtype=np.float64)
    nt, nphi = lut.shape
    theta, phi = dirs_to_angles(dirs_mol)
    u = theta / np.pi * (nt - 1)
    v = (phi + np.pi) / (2 * np.pi) * (nphi - 1)
    i0 = np.clip(np.floor(u).astype(np.int64), 0, nt - 2)
    j0 = np.clip(np.floor(v).astype(np.int64), 0, nphi - 2)
    fu, fv = u - i0, v - j0
    return ((1 - fu) * (1 - fv) * lut[i0, j0] + (1 - fu) * fv * lut[i0, j0 + 1]
            + fu * (1 - fv) * lut[i0 + 1, j0] + fu * fv * lut[i0 + 1, j0 + 1])


def vmf_factors(lmax: int, kappa: float) -> np.ndarray:
    """Funk–Hecke factors λ_l = I_{l+1/2}(κ)/I_{1/2}(κ), l = 0..L, of the von Mises–Fisher kernel.

    κ = 0 (uniform spread) gives λ = (1, 0, 0, ...); κ = inf gives all ones.
    """
    k = float(kappa)
    if not (k >= 0):
        raise MagretinaError(f"von Mises-Fisher kappa = {kappa!r} is out of range; allowed [0, inf]")
    l = np.arange(int(lmax) + 1)
    if np.isinf(k):
        return np.ones(l.size)
    if k == 0:
        return (l == 0).astype(float)
    # exponentially scaled Bessel functions: the e^κ factors cancel in the ratio
    return ive(l + 0.5, k) / ive(0.5, k)


class SphericalHarmonic:
    """A full-sphere response f(d) = Σ c_lm Y_lm(d) (real harmonics, molecular frame).

    Parameters
    ----------
    coeffs : array_like, shape ((L+1)²,)
        Coefficients in flat order l² + l + m.
    """

    axial = False

    def __init__(self, coeffs):
        c = np.asarray(coeffs, dtype=np.float64).ravel()
        lmax = int(round(np.sqrt(c.size))) - 1
        if c.size == 0 or (lmax + 1) ** 2 != c.size:
            raise MagretinaError(f"spherical-harmonic coefficients must number (l_max+1)^2, got {c.size}")
        if not np.all(np.isfinite(c)):
            raise MagretinaError("spherical-harmonic coefficients must be finite")
        self.coeffs = c
        self.coeffs.setflags(write=False)
        self.lmax = lmax

    # --- evaluation --------------------------------------------------------------
    def evaluate_dirs(self, dirs_mol):
        """f for field directions in the molecular frame, shape (N, 3) -> (N,) (or (3,) -> float)."""
        d = np.asarray(dirs_mol, dtype=np.float64)
        out = real_sph_harm(self.lmax, d.reshape(-1, 3)) @ self.coeffs
        return float(out[0]) if d.ndim == 1 else out.reshape(d.shape[:-1])

    def sphere_lut(self, n_theta: int = 181, n_phi: int = 361) -> np.ndarray:
        """Samples on the equiangular grid of :func:`sphere_lut_nodes`, shape (n_theta, n_phi).

        ``lut[i, j] = f(θ_i, φ_j)``, θ_i = linspace(0, π, n_theta)[i] from +z,
        φ_j = linspace(−π, π, n_phi)[j] (endpoint included) from +x towards +y.
        """
        th, ph = sphere_lut_nodes(n_theta, n_phi)
        d = angles_to_dirs(th[:, None], ph[None, :]).reshape(-1, 3)
        return (real_sph_harm(self.lmax, d) @ self.coeffs).reshape(th.size, ph.size)

    @property
    def is_even(self) -> bool:
        """True if all odd-degree coefficients vanish (f(−d) = f(d))."""
        return bool(np.all(self.coeffs[degrees(self.lmax) % 2 == 1] == 0.0))

    def mean(self) -> float:
        """Average of f over the sphere: c_00 / √(4π)."""
        return float(self.coeffs[0] / np.sqrt(4 * np.pi))

    def extremes(self, order: int = 131):
        """(min, argmin direction, max, argmax direction) sampled on a Lebedev grid (refined)."""
        nodes, _ = lebedev_grid(order)
        vals = self.evaluate_dirs(nodes)
        out = []
        for sign, i in ((1.0, int(np.argmin(vals))), (-1.0, int(np.argmax(vals)))):
            th, ph = dirs_to_angles(nodes[i][None])
            res = minimize(lambda x: sign * self.evaluate_dirs(angles_to_dirs(x[0], x[1])),
                           x0=[th[0], ph[0]], method="Nelder-Mead",
                           options={"xatol": 1e-9, "fatol": 1e-15})
            d = angles_to_dirs(res.x[0], res.x[1])
            v = sign * res.fun
            if sign * v > sign * vals[i]:  # refinement must not be worse than the node
                d, v = nodes[i], vals[i]
            out.append((float(v), np.asarray(d, dtype=float)))
        return out[0][0], out[0][1], out[1][0], out[1][1]

    # --- exact orientational operations ------------------------------------------
    def axial_average(self) -> Legendre:
        """The axial response after free rotation about molecular z: Σ_l c_l0 Y_l0(θ).

        Returned as a :class:`Legendre` series with c_l = c_l0 √((2l+1)/4π).
        """
        l = np.arange(self.lmax + 1)
        return Legendre(self.coeffs[lm_index(l, 0)] * np.sqrt((2 * l + 1) / (4 * np.pi)))

    def vmf_average(self, kappa: float) -> "SphericalHarmonic":
        """f̄(d) = ∫ f(d') vMF(d'; d, κ) dd': von Mises–Fisher disorder of concentration κ.

        Exact (Funk–Hecke): degree l is multiplied by I_{l+1/2}(κ)/I_{1/2}(κ).
        """
        lam = vmf_factors(self.lmax, kappa)
        return SphericalHarmonic(self.coeffs * lam[degrees(self.lmax)])

    def rotated(self, R_new_old) -> "SphericalHarmonic":
        """g(d) = f(Rᵀ d): the response carried along by the rotation R (3×3 or scipy Rotation).

        Degree-wise projection on a Lebedev rule exact for degree 2L, so exact to round-off.
        """
        r = np.asarray(R_new_old.as_matrix() if hasattr(R_new_old, "as_matrix") else R_new_old,
                       dtype=np.float64)
        if r.shape != (3, 3) or np.max(np.abs(r @ r.T - np.eye(3))) > 1e-9:
            raise MagretinaError("rotation must be a 3x3 orthogonal matrix or a scipy Rotation")
        nodes, w = lebedev_grid(lebedev_order_for(2 * self.lmax))
        vals = self.evaluate_dirs(nodes @ r)  # rows: Rᵀ x_i
        return SphericalHarmonic(fit_quadrature(self.lmax, nodes, w, vals))

    def rotation_average(self, axis) -> "SphericalHarmonic":
        """Average over free rotation about ``axis`` (molecular frame); exact."""
        a = np.asarray(axis, dtype=np.float64)
        if a.shape != (3,) or not np.all(np.isfinite(a)) or np.linalg.norm(a) == 0:
            raise MagretinaError(f"rotation axis must be a non-zero 3-vector, got {axis!r}")
        a = a / np.linalg.norm(a)
        # R maps the axis onto z; average about z keeps m = 0; rotate back
        r, _ = Rotation.align_vectors([[0.0, 0.0, 1.0]], [a])
        g = self.rotated(r)
        keep = orders(self.lmax) == 0
        return SphericalHarmonic(g.coeffs * keep).rotated(r.inv())

    def describe(self) -> dict:
        return {"kind": "harmonic", "lmax": self.lmax, "coeffs": self.coeffs.tolist()}

    def __repr__(self):
        return f"SphericalHarmonic(lmax={self.lmax}, mean={self.mean():.6g})"
