"""The end-to-end path for one shot: field + pose + layout + response + view → arrays.

:func:`render_pattern` gives the raw response value per pixel; :func:`render`
composites the normalised modulation onto a scene.  Both build the per-shot inputs
of :mod:`renderer.kernels` (the field in each eye's frame, the response lookup
table) and call the numba kernels.  The modulation is normalised by the mean
signal over the layout's whole visual field, solid-angle weighted on a fixed
head-frame grid, so the same receptor gets the same modulation in every view.
This module does no file I/O.
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass, replace

import numpy as np

from . import kernels
from .defaults import DEFAULT_GAIN
from .errors import MagretinaError
from .eye.alignment import Normal
from .eye.alignment.base import Alignment
from .response.base import LUT_SIZE, PRODUCTS
from .scene import Scene, dusk
from .views.panorama import HeadPanorama

#: Head-frame grid used for the visual-field mean (width; height is half).  Measured
#: against a 4096-wide grid for the lateral, frontal and tawny-owl layouts, the 360-wide
#: grid's mean is within 3.5e-5 (relative): far below one 8-bit step of any modulation,
#: at a quarter of the cost of a 720-wide grid.
MEAN_GRID_WIDTH = 360


@dataclass(frozen=True)
class ShotInputs:
    """Kernel inputs for one field, pose, layout and response.

    ``lut`` is the receptor-signal table (L,) when every eye reads the same one, else
    the stack (K, L) that ``eye_params`` index; ``cubes`` (C, 6, n, n) holds the
    full-frame tables (None when no eye needs one).  Pass both to the kernels.
    """

    R_eye_head: np.ndarray
    eye_params: np.ndarray
    b_eye: np.ndarray
    lut: np.ndarray
    R_head_world: np.ndarray
    b_head_unit: np.ndarray
    total_T: float
    cubes: np.ndarray | None = None
    #: A lab-fixed RF response (:class:`LabInputs`), evaluated per pixel in NumPy instead
    #: of through ``lut``/``cubes`` (which then hold a flat placeholder); None otherwise.
    lab: "LabInputs | None" = None

    @property
    def luts(self) -> np.ndarray:
        """The response tables as a stack, shape (K, L)."""
        return self.lut if self.lut.ndim == 2 else self.lut[None, :]


@dataclass(frozen=True)
class LabInputs:
    """What a lab-fixed RF response needs per frame: the table, the RF coil's direction in
    each eye's frame (E, 3), how each eye reads it ("full": the molecular frame of a
    full-frame alignment; "in-plane average": the mean over the in-plane angle about the
    receptor axis) and the product."""

    response: object
    rf_eye: np.ndarray
    modes: tuple
    product: str


#: Side of the cube-map faces for full-frame responses (see kernels.cube_table).
CUBE_SIZE = 257

_TABLE_CACHE: dict = {}
_CACHE_LIMIT = 32


def _cached(kind, response, key, build):
    """Per-response table cache: tilt/disorder projections and cube maps are built once
    per (response object, alignment), not per shot."""
    ck = (kind, id(response), key)
    hit = _TABLE_CACHE.get(ck)
    if hit is not None and hit[0]() is response:
        return hit[1]
    value = build()
    value.setflags(write=False)
    if len(_TABLE_CACHE) >= _CACHE_LIMIT:
        _TABLE_CACHE.pop(next(iter(_TABLE_CACHE)))
    try:
        ref = weakref.ref(response)
    except TypeError:
        return value
    _TABLE_CACHE[ck] = (ref, value)
    return value


def _check_product(product):
    if product not in PRODUCTS:
        raise MagretinaError(f"product = {product!r}: allowed {', '.join(PRODUCTS)}")


def response_lut(response, product="singlet", n=LUT_SIZE, alignment=None) -> np.ndarray:
    """The receptor signal table: f, or 1 − f if the triplet product drives vision,
    after the alignment hypothesis's averaging (default: none)."""
    _check_product(product)
    al = Normal() if alignment is None else alignment
    lut = _cached("lut", response, (al, int(n)),
                  lambda: np.ascontiguousarray(al.axial_lut(response, n), dtype=np.float64))
    if not np.all(np.isfinite(lut)):
        raise MagretinaError("the response gives non-finite values somewhere in cos θ ∈ [-1, 1]")
    return 1.0 - lut if product == "triplet" else np.array(lut)


def response_cube(response, product="singlet", n=CUBE_SIZE) -> np.ndarray:
    """The full-frame signal table on a cube map (6, n, n) (see kernels.cube_table)."""
    _check_product(product)
    cube = _cached("cube", response, int(n), lambda: kernels.cube_table(response.evaluate_dirs, n))
    if not np.all(np.isfinite(cube)):
        raise MagretinaError("the response gives non-finite values for some field direction")
    return 1.0 - cube if product == "triplet" else np.array(cube)


def prepare(field, pose, layout, response, product="singlet", eye_offsets=None) -> ShotInputs:
    """Pack the per-shot kernel inputs.

    Parameters
    ----------
    field, pose, layout, response
        As :func:`render_pattern`.
    product : "singlet" or "triplet"
    eye_offsets : mapping, optional
        Eye movements for this shot, {eye name or index: (d_azimuth, d_elevation,
        d_torsion) in degrees}; see :meth:`renderer.eye.Layout.moved`.

    With a zero field the receptors have no direction to respond to; they then all
    give the response's spherical mean (no pattern; a ratio channel gives 1).

    A lab-fixed RF response (``response.lab_rf``, see
    :class:`renderer.response.LabRFResponse`) is read per pixel from the static and the
    RF direction in each receptor's frame (``inputs.lab``); its eyes must have a
    full-frame alignment or one that averages over the in-plane angle (normal,
    chief-ray, full-frame with a random in-plane angle).
    """
    if eye_offsets:
        layout = layout.moved(eye_offsets)
    if getattr(response, "lab_rf", False):
        return _prepare_lab(field, pose, layout, response, product)
    luts, rows = [], []
    cubes, cube_rows = [], []
    for eye in layout.eyes:
        al = eye.alignment
        lut = response_lut(response, product, alignment=al)
        for k, other in enumerate(luts):
            if np.array_equal(other, lut):
                rows.append(k)
                break
        else:
            rows.append(len(luts))
            luts.append(lut)
        if al.needs_full_response():
            if not cubes:
                cubes.append(response_cube(response, product))
            cube_rows.append(0)
        else:
            cube_rows.append(0)
    R_eye_head, eye_params = kernels.pack_eyes(layout, rows, cube_rows)
    lut_stack = np.ascontiguousarray(np.stack(luts))
    # float32: rounding (6e-8 relative) far below the tables' bilinear error (~4e-6), and
    # half the bytes for the per-pixel reads, which miss the cache at this size
    cube_stack = np.ascontiguousarray(np.stack(cubes), dtype=np.float32) if cubes else None
    R_head_world = pose.R_head_world
    b = np.asarray(field.ned_T, float)
    total = float(np.linalg.norm(b))
    if total == 0.0:
        iso = lut_stack.copy()
        for k in range(iso.shape[0]):
            iso[k] = float(np.mean(0.5 * (lut_stack[k, 1:] + lut_stack[k, :-1])))
        if cube_stack is not None:
            mean_full = response_lut(response, product)  # in-plane average of the full response
            iso_full = float(np.mean(0.5 * (mean_full[1:] + mean_full[:-1])))
            cube_stack = np.full_like(cube_stack, iso_full)
        lut_stack = iso
        b_head = np.array([0.0, 0.0, 1.0])
    else:
        b_head = R_head_world @ (b / total)
    b_eye = np.ascontiguousarray(np.einsum("eij,j->ei", R_eye_head, b_head))
    lut_out = lut_stack[0].copy() if lut_stack.shape[0] == 1 else lut_stack
    return ShotInputs(R_eye_head, eye_params, b_eye, lut_out, R_head_world, b_head, total,
                      cube_stack)


class _Flat:
    """Placeholder response of the kernel inputs of a lab-fixed RF frame: signal 1 for
    every direction (axial table and full-frame cube alike)."""

    axial = True

    def __call__(self, cos_theta):
        return np.ones_like(np.asarray(cos_theta, dtype=np.float64))

    def lut(self, n=LUT_SIZE):
        return np.ones(int(n))

    def evaluate_dirs(self, dirs):
        return np.ones(np.asarray(dirs).shape[0])


_FLAT = _Flat()


def _prepare_lab(field, pose, layout, response, product) -> ShotInputs:
    _check_product(product)
    modes = []
    for eye in layout.eyes:
        al = eye.alignment
        if al.needs_full_response():
            modes.append("full")
        elif al.mode == kernels.MODE_AXIAL and type(al).axial_lut is Alignment.axial_lut:
            modes.append("in-plane average")
        else:
            raise MagretinaError(f"eye {eye.name!r}: alignment {al.kind!r} cannot read a "
                                 f"lab-fixed RF table (it needs each receptor's frame); use "
                                 f"normal, chief-ray or full-frame")
    if response.rf_ned is None:
        raise MagretinaError("lab-fixed RF table: no RF direction for this frame (give the "
                             "rf-on step that selects it a direction = [north, east, down])")
    base = prepare(field, pose, layout, _FLAT, "singlet")
    if base.total_T == 0.0:
        raise MagretinaError("lab-fixed RF table: the static field is zero, so its direction "
                             "in the receptor frame is undefined")
    rf_head = base.R_head_world @ np.asarray(response.rf_ned, float)
    rf_eye = np.einsum("eij,j->ei", base.R_eye_head, rf_head)
    return replace(base, lab=LabInputs(response, rf_eye, tuple(modes), product))


def lab_signal(inputs: ShotInputs, dirs_head, pick=-1) -> np.ndarray:
    """The signal of a lab-fixed RF response at head-frame directions (N, 3) -> (N,).

    For each eye (or the picked one) that sees a direction: the receptor's base axis and
    in-plane frame (:func:`renderer.kernels.receptor_frames_numpy`, the axes the kernels
    use), the molecular axes of its alignment (:func:`renderer.kernels.mode_axes_numpy`),
    the static and the RF direction on them, and Φ_S of the table there; an eye whose
    alignment averages over the in-plane angle takes the mean over K = L₀ + L₁ + 2
    equally spaced angles (exact for the expansion, whose in-plane Fourier orders are at
    most L₀ + L₁).  Eyes that see the same direction are averaged, as in the kernels.
    NaN where no eye sees (or the direction is NaN).
    """
    lab = inputs.lab
    table = lab.response.table
    d = np.asarray(dirs_head, dtype=np.float64).reshape(-1, 3)
    ok = np.all(np.isfinite(d), axis=1)
    acc = np.zeros(d.shape[0])
    cnt = np.zeros(d.shape[0])
    n_psi = table.lmax_static + table.lmax_rf + 2
    for e in range(inputs.R_eye_head.shape[0]):
        if pick >= 0 and e != pick:
            continue
        p = inputs.eye_params[e]
        u = np.where(ok[:, None], d, 0.0) @ inputs.R_eye_head[e].T
        vis = ok.copy()
        if p[kernels.P_FULL] == 0.0:
            vis &= kernels.visible_numpy(u, p[kernels.P_NASAL:kernels.P_VENTRAL + 1],
                                         p[kernels.P_SIGN])
        if not vis.any():
            continue
        a, e1, e2 = kernels.receptor_frames_numpy(u[vis], p)
        b, r = inputs.b_eye[e], lab.rf_eye[e]
        if lab.modes[e] == "full":
            x, y, z = kernels.mode_axes_numpy(p, a, e1, e2)
            frames = [(x, y, z)]
        else:
            frames = []
            for k in range(n_psi):
                c, s_ = np.cos(2 * np.pi * k / n_psi), np.sin(2 * np.pi * k / n_psi)
                frames.append((c * e1 + s_ * e2, c * e2 - s_ * e1, a))
        val = np.zeros(a.shape[0])
        for x, y, z in frames:
            b_mol = np.stack([x @ b, y @ b, z @ b], axis=1)
            r_mol = np.stack([x @ r, y @ r, z @ r], axis=1)
            val += table.evaluate(b_mol, r_mol)
        val /= len(frames)
        if lab.product == "triplet":
            val = 1.0 - val
        acc[vis] += val
        cnt[vis] += 1
    with np.errstate(invalid="ignore"):
        return np.where(cnt > 0, acc / np.maximum(cnt, 1), np.nan)


def _lab_map(inputs, view, layout, dirs_view=None):
    """:func:`lab_signal` over a view, (H, W)."""
    H, W = view.shape
    M = _R_head_view(view, inputs)
    d = view.directions(layout) if dirs_view is None else dirs_view
    return lab_signal(inputs, np.asarray(d, float).reshape(-1, 3) @ M.T,
                      _pick(view, layout)).reshape(H, W)


def _R_head_view(view, inputs: ShotInputs):
    if view.frame == "world":
        return inputs.R_head_world
    if view.frame == "head":
        return np.eye(3)
    raise MagretinaError(f"view frame {view.frame!r} unknown")


def _pick(view, layout) -> int:
    return -1 if view.pick is None else layout.eye_index(view.pick)


def signal_map(inputs, view, layout, lut=None) -> np.ndarray:
    """The receptor signal over a view from already prepared inputs.

    Parameters
    ----------
    inputs : ShotInputs
        From :func:`prepare` (field in each eye's frame, alignment tables).
    view : View
    layout : Layout
        The layout ``inputs`` were prepared for.
    lut : ndarray (n,), optional
        Signal table in cos θ; default ``inputs.lut`` (the prepared product).

    Returns
    -------
    ndarray, (H, W) float64
        NaN where no eye sees (as :func:`render_pattern`).
    """
    if inputs.lab is not None:
        return _lab_map(inputs, view, layout)
    lut = inputs.lut if lut is None else lut
    H, W = view.shape
    M = np.ascontiguousarray(_R_head_view(view, inputs))
    pick = _pick(view, layout)
    if view.equirect:
        out = np.empty((H, W))
        kernels.pattern_equirect(*view.tables(), M, inputs.R_eye_head, inputs.eye_params,
                                 inputs.b_eye, lut, pick, out, cubes=inputs.cubes)
        return out
    dirs = np.ascontiguousarray(view.directions(layout).reshape(-1, 3))
    out = np.empty(dirs.shape[0])
    kernels.pattern_dirs(dirs, M, inputs.R_eye_head, inputs.eye_params, inputs.b_eye, lut, pick,
                         out, cubes=inputs.cubes)
    return out.reshape(H, W)


def visual_field_mean(inputs: ShotInputs, width=MEAN_GRID_WIDTH) -> float:
    """Solid-angle-weighted mean signal over every direction some eye sees."""
    view = HeadPanorama(width)
    if inputs.lab is not None:
        s = lab_signal(inputs, view.directions().reshape(-1, 3)).reshape(view.shape)
    else:
        s = np.empty(view.shape)
        kernels.pattern_equirect(*view.tables(), np.eye(3), inputs.R_eye_head, inputs.eye_params,
                                 inputs.b_eye, inputs.lut, -1, s, cubes=inputs.cubes)
    w = view.solid_angle()
    seen = ~np.isnan(s)
    if not seen.any():
        raise MagretinaError("no eye of the layout sees any direction")
    return float(np.sum(np.where(seen, s, 0.0) * w) / np.sum(w[seen]))


def render_pattern(field, pose, layout, response, view, eye_offsets=None) -> np.ndarray:
    """The response value f(cos θ) at each pixel, before normalisation.

    Parameters
    ----------
    field : FieldVector
    pose : Pose
    layout : Layout
    response : response object (axial, or full: read as each eye's alignment says)
    view : View
    eye_offsets : mapping, optional
        Eye movements for this shot (see :func:`prepare`).

    Returns
    -------
    ndarray, (H, W) float64
        NaN where no eye sees; where two eyes see a pixel, the mean of their values
        unless the view picks one eye.
    """
    if eye_offsets:
        layout = layout.moved(eye_offsets)
    inputs = prepare(field, pose, layout, response, "singlet")
    return signal_map(inputs, view, layout)


def render_signal(field, pose, layout, response, view, product="singlet", eye_offsets=None):
    """(signal map (H, W), visual-field mean signal): the inputs of the modulation."""
    if eye_offsets:
        layout = layout.moved(eye_offsets)
    inputs = prepare(field, pose, layout, response, product)
    return signal_map(inputs, view, layout), visual_field_mean(inputs)


def render(field, pose, layout, response, view, scene=None, gain=DEFAULT_GAIN, product="singlet",
           outside=0.25, eye_offsets=None) -> np.ndarray:
    """Composite the modulation pattern onto a scene.

    Parameters
    ----------
    field, pose, layout, response, view
        As :func:`render_pattern`.
    scene : Scene, str path, or None
        A 2:1 world panorama (None: the procedural dusk scene at the view's width
        or 2048, whichever is larger).
    gain : float
        Modulation gain: m = gain·(s/⟨s⟩ − 1), ⟨s⟩ the visual-field mean signal
        (default :data:`renderer.defaults.DEFAULT_GAIN`).
    product : "singlet" or "triplet"
        Which reaction product drives the visual signal (s = f or 1 − f).
    outside : float
        Luminance factor for pixels no eye sees (0 black, 1 scene unchanged).
    eye_offsets : mapping, optional
        Eye movements for this shot (see :func:`prepare`).

    Returns
    -------
    ndarray, (H, W, 3) float32 linear light in [0, 1]
        (Pixels outside a non-rectangular view's footprint are 0.)
    """
    if scene is None:
        scene = dusk(max(2048, view.shape[1] if view.equirect else 2048))
    elif not isinstance(scene, Scene):
        scene = Scene.load(scene)
    g = float(gain)
    if not np.isfinite(g) or g < 0:
        raise MagretinaError(f"gain = {gain!r}: must be a finite number >= 0")
    o = float(outside)
    if not 0.0 <= o <= 1.0:
        raise MagretinaError(f"outside = {outside!r}: allowed [0, 1]")
    if eye_offsets:
        layout = layout.moved(eye_offsets)
    inputs = prepare(field, pose, layout, response, product)
    mean = visual_field_mean(inputs)
    if mean == 0.0:
        raise MagretinaError("the mean signal over the visual field is 0; modulation undefined")
    return composite_inputs(inputs, mean, layout, view, scene, g, o)


def _filter_args(view, scene):
    """The pyramid and tap count the kernels take for the view's scene filter."""
    name = getattr(view, "filter", "bilinear")
    nt = kernels.ntaps_for(name)
    return (scene.pyramid() if nt > 0 else None), nt


def composite_inputs(inputs, mean, layout, view, scene, gain, outside) -> np.ndarray:
    """Composite with prepared inputs (the study runner reuses ``inputs``).

    The scene is read through the view's ``filter``; with ``supersample`` N > 1 the
    modulation factor is the mean of its values on the N × N sub-pixels (see
    :func:`_supersampled_factor`).
    """
    n = int(getattr(view, "supersample", 1))
    if n > 1 or inputs.lab is not None:
        # The scene through the view's filter, unmodulated, times each pixel's factor
        # (box-averaged over n x n sub-pixels; n = 1 for a lab-fixed RF frame, whose
        # signal the kernels do not evaluate).
        base = _composite(inputs, mean, layout, view, scene, 0.0, 1.0)
        k, seen = _supersampled_factor(inputs, mean, layout, view, n, gain, outside)
        out = base * k[..., None].astype(np.float32)
        np.clip(out, 0.0, 1.0, out=out, where=seen[..., None])
        return out
    return _composite(inputs, mean, layout, view, scene, gain, outside)


def _supersampled_factor(inputs, mean, layout, view, n, gain, outside):
    """The modulation factor of each pixel as the box average over its n × n sub-pixels
    (the pixel grid of ``view.scaled(n)``) of 1 + gain·(s/⟨s⟩ − 1) where an eye sees and
    ``outside`` where none does, over the sub-pixels inside the view's footprint: the
    pattern and the visual-field outline get the pixel's box-filtered value rather than
    its centre's.  Returns (factor (H, W), any sub-pixel seen (H, W) bool)."""
    H, W = view.shape
    fine = view if n == 1 else view.scaled(n)
    sig = signal_map(inputs, fine, layout, inputs.lut)
    seen = ~np.isnan(sig)
    k = np.where(seen, 1.0 + gain * (np.where(seen, sig, mean) / mean - 1.0), outside)
    if fine.equirect:
        inside = np.ones(sig.shape, bool)
    else:
        inside = ~np.isnan(fine.directions(layout)[..., 0])

    def block_sum(a):
        return a.reshape(H, n, W, n).sum(axis=(1, 3))

    cnt = block_sum(inside.astype(np.float64))
    ksum = block_sum(np.where(inside, k, 0.0))
    factor = np.where(cnt > 0, ksum / np.maximum(cnt, 1.0), outside)
    any_seen = block_sum((seen & inside).astype(np.float64)) > 0
    return factor, any_seen


def _composite(inputs, mean, layout, view, scene, gain, outside) -> np.ndarray:
    H, W = view.shape
    M = np.ascontiguousarray(_R_head_view(view, inputs))
    Q = np.ascontiguousarray(inputs.R_head_world.T @ M)  # R_world_view
    pick = _pick(view, layout)
    img = scene.image
    out = np.empty((H, W, img.shape[2]), np.float32)
    inv_mean = 1.0 / mean
    if view.equirect:
        tables = view.tables()
        if view.frame == "world" and img.shape[:2] == (H, W) and scene.north_col == W / 2.0:
            # the view's grid is the scene's: nothing is resampled, nothing to filter
            kernels.composite_world_aligned(img, *tables, M, inputs.R_eye_head, inputs.eye_params,
                                            inputs.b_eye, inputs.lut, pick, inv_mean, gain, outside,
                                            out, cubes=inputs.cubes)
        else:
            pyr, nt = _filter_args(view, scene)
            kernels.composite_resampled(img, scene.north_col, *tables, M, Q, inputs.R_eye_head,
                                        inputs.eye_params, inputs.b_eye, inputs.lut, pick,
                                        inv_mean, gain, outside, out, cubes=inputs.cubes,
                                        pyramid=pyr, ntaps_max=nt)
        return out
    dirs = np.ascontiguousarray(view.directions(layout).reshape(-1, 3))
    flat = out.reshape(-1, img.shape[2])
    pyr, nt = _filter_args(view, scene)
    kernels.composite_dirs(img, scene.north_col, dirs, M, Q, inputs.R_eye_head, inputs.eye_params,
                           inputs.b_eye, inputs.lut, pick, inv_mean, gain, outside, flat,
                           cubes=inputs.cubes, pyramid=pyr, ntaps_max=nt, grid_width=W)
    return out


def check_signal_nonzero(response, product="singlet", what="the response"):
    """Refuse a response whose signal is 0 for every field direction.

    The modulation m = s/<s> - 1 divides by the mean signal <s> over the visual
    field, which is then 0 for any field, pose and layout (e.g. Legendre
    coefficients [0.0]); refusing here, in validation, keeps the failure out of
    the rendering workers.  Responses this check cannot evaluate pass (their own
    validation reports them).
    """
    try:
        try:
            table = response_lut(response, product, n=257)
        except (AttributeError, NotImplementedError, TypeError):
            table = response_cube(response, product, n=16)
    except (MagretinaError, AttributeError, NotImplementedError, TypeError, ValueError):
        return
    if not np.any(table):
        raise MagretinaError(f"{what}: the {product} signal is 0 for every field direction, so "
                             f"the mean signal over the visual field is 0 and the modulation "
                             f"s/<s> - 1 is undefined")
