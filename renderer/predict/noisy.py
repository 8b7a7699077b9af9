"""Noisy receptor-level stimuli: one realisation of the receptor counts, resampled to pixels.

Each receptor (or pool) of a mosaic sees the scene at its world direction; its mean
count is flux·time·L·(1 + gain·m) with m = s/⟨s⟩ − 1 normalised exactly as the
rendered frames are (:func:`renderer.pipeline.visual_field_mean`); one count vector
is drawn from the noise model with a fixed seed.  Every seen pixel of the view then
takes the scene colour times n/μ₀ of its nearest receptor's unit, μ₀ the unit's
unmodulated mean count, so the picture shows the pattern as the receptor array
would report it, noise and mosaic grain included.  Luminance is the Rec. ITU-R
BT.709 weighting of linear RGB.  A model prediction, not an animal's percept.
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from .. import kernels, pipeline
from ..errors import MagretinaError
from ..scene import Scene, dusk

#: Rec. ITU-R BT.709 luminance weights of linear R, G, B.
BT709 = np.array([0.2126, 0.7152, 0.0722])


def receptor_dirs_head(inputs, mosaic) -> np.ndarray:
    """Head-frame view directions (N, 3) of the receptors for the eyes as placed in
    ``inputs`` (so after any eye movement: receptors keep their place on the retina)."""
    e = mosaic.eye_index
    return np.einsum("nji,nj->ni", inputs.R_eye_head[e], mosaic.dirs_eye)


def receptor_signal(inputs, mosaic) -> np.ndarray:
    """The rendered signal at every receptor, (N,): :func:`renderer.kernels.signal_numpy`
    at the receptor's head direction with its own eye picked, so every alignment mode
    (per-eye tables, ratio, full frame) is read exactly as the frames are drawn."""
    d = receptor_dirs_head(inputs, mosaic)
    s = np.empty(mosaic.n_receptors)
    for k in range(inputs.R_eye_head.shape[0]):
        sel = mosaic.eye_index == k
        if sel.any():
            s[sel] = kernels.signal_numpy(d[sel], inputs.R_eye_head, inputs.eye_params,
                                          inputs.b_eye, inputs.lut, pick=k, cubes=inputs.cubes)
    if np.any(np.isnan(s)):
        raise MagretinaError("mosaic: some receptors lie outside their eye's field of view in "
                             "this layout; build the mosaic on this layout")
    return s


def receptor_factors(field, pose, layout, response, mosaic, counts, scene, seed=0,
                     product="singlet", eye_offsets=None):
    """One noisy draw of every readout unit, as n/μ₀ (1 = the unmodulated mean).

    Returns
    -------
    factor : (P,) float64, per pool (per receptor without pooling)
    mu : (N,) float64, mean counts per receptor
    """
    inputs = pipeline.prepare(field, pose, layout, response, product, eye_offsets)
    mean = pipeline.visual_field_mean(inputs)
    if mean == 0.0:
        raise MagretinaError("the mean signal over the visual field is 0; modulation undefined")
    s = receptor_signal(inputs, mosaic)
    dirs_world = receptor_dirs_head(inputs, mosaic) @ inputs.R_head_world  # v_world = R_world_head v_head
    L = kernels.sample_equirect_numpy(scene.image, scene.north_col, dirs_world) @ BT709
    mu0 = counts.photons_per_integration * L
    mu = mu0 * (1.0 + counts.gain * (s / mean - 1.0))
    if np.any(mu < 0):
        raise MagretinaError(f"gain = {counts.gain:g} makes some mean counts negative; lower it")
    rng = np.random.default_rng(int(seed))
    n = counts.noise.sample(mu, rng)
    P = mosaic.n_pools
    n_p = np.bincount(mosaic.pool, n, P)
    mu0_p = np.bincount(mosaic.pool, mu0, P)
    return np.where(mu0_p > 0, n_p / np.where(mu0_p > 0, mu0_p, 1.0), 1.0), mu


def render_noisy(field, pose, layout, response, view, mosaic, counts, scene=None, seed=0,
                 product="singlet", outside=0.25, eye_offsets=None):
    """Composite one noisy realisation of the receptor signals.

    Parameters
    ----------
    field, pose, layout, response, view : as :func:`renderer.render`
    mosaic : Mosaic
    counts : CountModel (its ``gain`` is the modulation gain)
    scene : Scene or None (procedural dusk)
    seed : int, seed of the count draw
    eye_offsets : mapping, optional; eye movements as in :func:`renderer.pipeline.prepare`

    Returns
    -------
    image : (H, W, 3) float32 linear light in [0, 1]
    """
    if scene is None:
        scene = dusk(2048)
    elif not isinstance(scene, Scene):
        scene = Scene.load(scene)
    if eye_offsets:
        layout = layout.moved(eye_offsets)
    base = pipeline.render(field, pose, layout, response, view, scene=scene, gain=0.0,
                           product=product, outside=outside)
    sig, _ = pipeline.render_signal(field, pose, layout, response, view, product)
    seen = ~np.isnan(sig)
    factor, _ = receptor_factors(field, pose, layout, response, mosaic, counts, scene, seed,
                                 product)
    e = mosaic.eye_index
    R_head_world = pose.R_head_world
    R_eye_head, _ = kernels.pack_eyes(layout)
    dirs_head = np.einsum("nji,nj->ni", R_eye_head[e], mosaic.dirs_eye)

    H, W = view.shape
    d = view.directions(layout).reshape(-1, 3)
    if view.frame == "world":
        d = d @ R_head_world.T
    sel = np.arange(mosaic.n_receptors)
    if view.pick is not None:
        sel = np.nonzero(e == layout.eye_index(view.pick))[0]
    flat_seen = seen.reshape(-1) & ~np.isnan(d[:, 0])
    nearest = cKDTree(dirs_head[sel]).query(d[flat_seen])[1]
    out = base.reshape(-1, base.shape[2]).copy()
    out[flat_seen] = np.clip(out[flat_seen] * factor[mosaic.pool[sel[nearest]]][:, None], 0.0, 1.0)
    return out.reshape(H, W, -1).astype(np.float32)


__all__ = ["render_noisy", "receptor_factors", "BT709"]
