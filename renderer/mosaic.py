"""Receptor mosaics: where the receptors of each eye sit, sampled once with a fixed seed.

A mosaic places discrete receptors on each eye's retina instead of evaluating the
pattern per pixel.  Density is given per mm² of retina (``unit="mm2"``: uniform in
retinal area on the spherical retina of :class:`renderer.eye.Eye`) or per square
degree of visual field (``unit="deg2"``: uniform in view-direction solid angle),
optionally scaled by a relative-density profile of eccentricity (angle of the view
direction from the optic axis).  Points are drawn on the whole unit sphere of view
directions in the eye frame (per mm²: thinned in proportion to the retinal area per
steradian, from :meth:`Eye.retinal_points`), either as a jittered Fibonacci lattice (each point uniform inside its own
equal-area band, so the expected density is exactly uniform) or as a Poisson-disc
set (scipy's ``qmc.PoissonDisk`` in the Lambert azimuthal equal-area plane about
the optic axis, thinned to the expected count), then kept where the eye sees.
Receptors can be pooled: each pool collects the receptors in the Voronoi cell of a
lattice of centres whose cells have the solid angle of a disc of the pooling radius.
This module only does geometry; counts, noise and information are in
:mod:`renderer.predict`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.spatial import cKDTree
from scipy.stats import qmc

from .errors import MagretinaError, check_range

UNITS = ("mm2", "deg2")
METHODS = ("jittered", "poisson-disc")

#: Square degrees on the whole sphere, 4π (180/π)².
SPHERE_DEG2 = 4.0 * math.pi * (180.0 / math.pi) ** 2

_GOLDEN_ANGLE = math.pi * (3.0 - math.sqrt(5.0))


@dataclass(frozen=True)
class MosaicSpec:
    """How to place receptors.

    Parameters
    ----------
    density : float
        Peak receptor density, receptors per mm² of retina (``unit="mm2"``) or per
        square degree of visual field (``unit="deg2"``); > 0.
    unit : {"mm2", "deg2"}
    method : {"jittered", "poisson-disc"}
    seed : int
        Master seed; eye k uses ``SeedSequence(seed).spawn(E)[k]``.
    eccentricity_deg, relative_density : tuple of float
        Optional profile: relative density (in [0, 1], linear interpolation, held
        constant beyond the last node) at eccentricities (degrees from the optic
        axis, increasing).  Empty: uniform.
    pool_radius_deg : float
        Pooling radius (degrees of visual angle); 0 = no pooling.
    """

    density: float = 0.05
    unit: str = "deg2"
    method: str = "jittered"
    seed: int = 0
    eccentricity_deg: tuple = ()
    relative_density: tuple = ()
    pool_radius_deg: float = 0.0

    def __post_init__(self):
        check_range("mosaic density", self.density, 0.0, None, lo_open=True,
                    unit="receptors per " + ("mm² of retina" if self.unit == "mm2" else "deg²"))
        if self.unit not in UNITS:
            raise MagretinaError(f"mosaic unit = {self.unit!r}: allowed {', '.join(UNITS)}")
        if self.method not in METHODS:
            raise MagretinaError(f"mosaic method = {self.method!r}: allowed {', '.join(METHODS)}")
        if int(self.seed) != self.seed or self.seed < 0:
            raise MagretinaError(f"mosaic seed = {self.seed!r}: must be an integer >= 0")
        ecc = tuple(float(x) for x in self.eccentricity_deg)
        rel = tuple(float(x) for x in self.relative_density)
        if len(ecc) != len(rel):
            raise MagretinaError(f"mosaic eccentricity_deg ({len(ecc)} values) and "
                                 f"relative_density ({len(rel)} values) must have equal length")
        if ecc:
            if any(b <= a for a, b in zip(ecc, ecc[1:])) or ecc[0] < 0 or ecc[-1] > 180:
                raise MagretinaError(f"mosaic eccentricity_deg = {list(ecc)}: must increase "
                                     f"strictly within [0, 180] degrees")
            if any(not 0.0 <= r <= 1.0 for r in rel) or max(rel) <= 0.0:
                raise MagretinaError(f"mosaic relative_density = {list(rel)}: each in [0, 1], "
                                     f"at least one > 0")
        object.__setattr__(self, "eccentricity_deg", ecc)
        object.__setattr__(self, "relative_density", rel)
        check_range("mosaic pool_radius_deg", self.pool_radius_deg, 0.0, 180.0, unit="degrees")
        object.__setattr__(self, "density", float(self.density))
        object.__setattr__(self, "pool_radius_deg", float(self.pool_radius_deg))

    def describe(self) -> dict:
        return {k: (list(v) if isinstance(v, tuple) else v)
                for k, v in ((f, getattr(self, f)) for f in self.__dataclass_fields__)}


@dataclass(frozen=True)
class Mosaic:
    """Receptor positions of a layout.

    Attributes
    ----------
    eye_index : (N,) int32
        Which eye of the layout each receptor belongs to.
    axes_eye : (N, 3) float64
        Unit receptor axes (inward retinal normals) in the receptor's eye frame.
    dirs_head : (N, 3) float64
        Unit view directions of the receptors in the head frame.
    pool : (N,) int32
        Pool (readout unit) of each receptor; without pooling ``pool = arange(N)``.
    pool_eye : (P,) int32
        Eye of each pool.
    spec : MosaicSpec
    eye_names : tuple of str
    dirs_eye : (N, 3) float64
        Unit view directions of the receptors in their eye's frame.  A receptor stays
        where it is on the retina when the eye moves, so predictions rebuild the head
        directions, receptor frames and visibility from these (not from ``dirs_head``,
        which holds for the layout the mosaic was built on).
    """

    eye_index: np.ndarray
    axes_eye: np.ndarray
    dirs_head: np.ndarray
    pool: np.ndarray
    pool_eye: np.ndarray
    spec: MosaicSpec
    eye_names: tuple
    dirs_eye: np.ndarray

    @property
    def n_receptors(self) -> int:
        return int(self.eye_index.shape[0])

    @property
    def n_pools(self) -> int:
        return int(self.pool_eye.shape[0])

    @property
    def pooled(self) -> bool:
        return self.n_pools != self.n_receptors

    def counts_per_eye(self) -> dict:
        return {name: int(np.sum(self.eye_index == k)) for k, name in enumerate(self.eye_names)}


def sphere_jittered(n, rng) -> np.ndarray:
    """``n`` unit vectors, a jittered Fibonacci lattice with its poles on ±x.

    Point k lies uniformly inside the k-th of n equal-area bands (Archimedes: equal
    heights along the axis cut equal areas), so the expected density is exactly
    uniform; its longitude follows the golden-angle spiral plus a jitter of up to
    half the mean spacing.  Returns (n, 3).
    """
    k = np.arange(n)
    z = 1.0 - (2.0 * k + 1.0 + rng.uniform(-1.0, 1.0, n)) / n
    r = np.sqrt(np.clip(1.0 - z * z, 0.0, 1.0))
    spacing = math.sqrt(4.0 * math.pi / max(n, 1))
    phi = (k * _GOLDEN_ANGLE + rng.uniform(0.0, 2.0 * math.pi)
           + rng.uniform(-0.5, 0.5, n) * spacing / np.maximum(r, spacing))
    return np.stack([z, r * np.cos(phi), r * np.sin(phi)], axis=-1)


def sphere_poisson_disc(n, rng) -> np.ndarray:
    """About ``n`` unit vectors with a minimum spacing, centred on +x.

    scipy's Poisson-disc sampler fills the Lambert azimuthal equal-area plane (a disc
    of radius 2 holds the whole unit sphere with areas preserved); the set is then
    randomly thinned to a binomial draw with mean ``n``, which keeps the minimum
    distance.  The spacing is exact near +x and stretched by up to 1/cos²(α/2) at
    angle α from it (the projection preserves area, not shape).  Returns (m, 3).
    """
    # scipy's sampler reaches about 0.60 points per r² of area; aim 15 % above n.
    r_plane = math.sqrt(0.60 * (4.0 * math.pi) / (1.15 * n))
    eng = qmc.PoissonDisk(d=2, radius=r_plane / 4.0, ncandidates=12, seed=rng)
    pts = eng.fill_space() * 4.0 - 2.0
    rho2 = np.sum(pts * pts, axis=1)
    pts = pts[rho2 <= 4.0]
    if pts.shape[0] < n:  # rare: too few for the target, keep them all
        keep = np.ones(pts.shape[0], bool)
    else:
        keep = rng.uniform(size=pts.shape[0]) < n / pts.shape[0]
    pts = pts[keep]
    rho2 = np.sum(pts * pts, axis=1)
    cos_a = 1.0 - rho2 / 2.0
    s = np.sqrt(np.clip(1.0 - rho2 / 4.0, 0.0, 1.0))  # sin α / ρ
    return np.stack([cos_a, pts[:, 0] * s, pts[:, 1] * s], axis=-1)


def retinal_area_per_sr(eye, dirs_eye, h=1e-4) -> np.ndarray:
    """Retinal area per steradian of view directions, dA/dΩ in mm² sr⁻¹, shape (N,).

    Central differences (step ``h`` rad, error O(h²)) of :meth:`Eye.retinal_points` along
    two tangent directions; for a spherical retina with the nodal point at its centre
    this is R² everywhere.
    """
    u = np.asarray(dirs_eye, float)
    ref = np.where(np.abs(u[:, :1]) < 0.9, np.array([[1.0, 0.0, 0.0]]), np.array([[0.0, 1.0, 0.0]]))
    e1 = np.cross(u, ref)
    e1 /= np.linalg.norm(e1, axis=1, keepdims=True)
    e2 = np.cross(u, e1)

    def P(v):
        v = v / np.linalg.norm(v, axis=1, keepdims=True)
        return eye.retinal_points(v) * eye.retina_radius_mm

    d1 = (P(u + h * e1) - P(u - h * e1)) / (2 * h)
    d2 = (P(u + h * e2) - P(u - h * e2)) / (2 * h)
    return np.linalg.norm(np.cross(d1, d2), axis=1)


def _relative(spec, ecc_deg):
    if not spec.eccentricity_deg:
        return np.ones_like(ecc_deg)
    return np.interp(ecc_deg, spec.eccentricity_deg, spec.relative_density)


def build_mosaic(layout, spec: MosaicSpec) -> Mosaic:
    """Place receptors on every eye of ``layout``.

    Parameters
    ----------
    layout : Layout
    spec : MosaicSpec

    Returns
    -------
    Mosaic
        Deterministic for a given layout and spec (seeded).
    """
    children = np.random.SeedSequence(int(spec.seed)).spawn(len(layout.eyes))
    idx, axes, dirs, dirs_e = [], [], [], []
    for k, eye in enumerate(layout.eyes):
        if spec.pool_radius_deg > 0:
            widest = max(eye.nasal_deg, eye.temporal_deg, eye.dorsal_deg, eye.ventral_deg)
            if spec.pool_radius_deg > widest:
                raise MagretinaError(
                    f"mosaic pool_radius_deg = {spec.pool_radius_deg:g} is larger than the field "
                    f"of eye {eye.name!r} (its widest half-width is {widest:g} degrees); allowed "
                    f"(0, {widest:g}]")
        rng = np.random.default_rng(children[k])
        thin = False
        if spec.unit == "mm2":
            # uniform in retinal area: oversample view directions at the largest retinal
            # area per steradian, then keep each with probability (dA/dΩ)/max
            probe = retinal_area_per_sr(eye, sphere_jittered(4000, rng))
            thin = probe.max() - probe.min() > 1e-9 * probe.max()  # d = 0 sphere: uniform
            jmax = 1.1 * float(probe.max()) if thin else float(probe.mean())
            n_full = spec.density * 4.0 * math.pi * jmax
        else:
            n_full = spec.density * SPHERE_DEG2
        if n_full > 5e7:
            raise MagretinaError(f"mosaic density = {spec.density:g} per {spec.unit} gives "
                                 f"{n_full:.3g} receptors on eye {eye.name!r}; allowed up to 5e7")
        n = int(round(n_full))
        if n < 1:
            raise MagretinaError(f"mosaic density = {spec.density:g} per {spec.unit} is too low: "
                                 f"eye {eye.name!r} gets no receptors")
        u = sphere_jittered(n, rng) if spec.method == "jittered" else sphere_poisson_disc(n, rng)
        keep = np.ones(u.shape[0], bool)
        if thin:
            keep &= rng.uniform(size=u.shape[0]) * jmax < retinal_area_per_sr(eye, u)
        a = eye.receptor_axes(u)
        keep &= eye.visible(u)
        if spec.eccentricity_deg:
            ecc = np.degrees(np.arccos(np.clip(u[:, 0], -1.0, 1.0)))
            keep &= rng.uniform(size=u.shape[0]) < _relative(spec, ecc)
        if not keep.any():
            raise MagretinaError(f"mosaic density = {spec.density:g} per {spec.unit} is too low: "
                                 f"eye {eye.name!r} gets no receptors in its field of view")
        u, a = u[keep], a[keep]
        idx.append(np.full(u.shape[0], k, np.int32))
        axes.append(a)
        dirs.append(u @ eye.R_head_eye.T)
        dirs_e.append(u)
    eye_index = np.concatenate(idx)
    axes_eye = np.ascontiguousarray(np.concatenate(axes))
    dirs_head = np.ascontiguousarray(np.concatenate(dirs))
    pool, pool_eye = _pools(layout, spec, eye_index, dirs_head)
    return Mosaic(eye_index, axes_eye, dirs_head, pool, pool_eye, spec,
                  tuple(e.name for e in layout.eyes), np.ascontiguousarray(np.concatenate(dirs_e)))


def _pools(layout, spec, eye_index, dirs_head):
    N = eye_index.shape[0]
    if spec.pool_radius_deg <= 0:
        return np.arange(N, dtype=np.int32), eye_index.copy()
    rho = math.radians(spec.pool_radius_deg)
    # centres whose Voronoi cells have the solid angle 2π(1 − cos ρ) of a cap of radius ρ
    n_centres = max(1, int(round(2.0 / (1.0 - math.cos(rho)))))
    centres = sphere_jittered(n_centres, np.random.default_rng(int(spec.seed) + 7919))
    pool = np.empty(N, np.int32)
    pool_eye = []
    offset = 0
    for k, eye in enumerate(layout.eyes):
        sel = np.nonzero(eye_index == k)[0]
        c_head = centres @ eye.R_head_eye.T  # lattice attached to each eye
        nearest = cKDTree(c_head).query(dirs_head[sel])[1]
        used, local = np.unique(nearest, return_inverse=True)
        pool[sel] = offset + local
        pool_eye.extend([k] * used.shape[0])
        offset += used.shape[0]
    return pool, np.asarray(pool_eye, np.int32)


def explicit_mosaic(layout, eye_index, dirs_eye, spec=None) -> Mosaic:
    """A mosaic with receptors at given view directions (tests, hand-made grids).

    Parameters
    ----------
    layout : Layout
    eye_index : (N,) int
    dirs_eye : (N, 3) unit view directions in each receptor's eye frame.
    """
    eye_index = np.asarray(eye_index, np.int32)
    u = np.asarray(dirs_eye, float)
    axes = np.empty_like(u)
    dirs = np.empty_like(u)
    for k, eye in enumerate(layout.eyes):
        sel = eye_index == k
        axes[sel] = eye.receptor_axes(u[sel])
        dirs[sel] = u[sel] @ eye.R_head_eye.T
    N = u.shape[0]
    return Mosaic(eye_index, np.ascontiguousarray(axes), np.ascontiguousarray(dirs),
                  np.arange(N, dtype=np.int32), eye_index.copy(), spec or MosaicSpec(),
                  tuple(e.name for e in layout.eyes), np.ascontiguousarray(u))


__all__ = ["MosaicSpec", "Mosaic", "build_mosaic", "explicit_mosaic", "sphere_jittered",
           "sphere_poisson_disc", "retinal_area_per_sr", "UNITS", "METHODS"]
