"""The packed-eye layout the kernels read, and the kernel mode codes.

For: the one definition of what a kernel knows about an eye.  :func:`pack_eyes` turns a
:class:`renderer.eye.Layout` (read by attribute only, never imported) into plain arrays:

* ``R_eye_head`` (E, 3, 3): v_eye = R_eye_head[e] @ v_head.
* ``eye_params`` (E, PARAMS), slots named by the ``P_*`` constants: the base-axis
  geometry (q = d/R and e2 = (R/a)², with q = 0, e2 = 1 for the chief ray), the four
  half-widths (rad), nasal sign, full-sphere flag, cos of the smallest and largest
  half-width (fast visibility), the alignment's kernel mode (``MODE_*``, the codes of
  :data:`KERNEL_MODES`, which the alignment classes of :mod:`renderer.eye.alignment`
  import from here), its response-table row and cube index, and the mode's constants
  (ratio population B, in-plane angle ψ).  Slots 18-19 are free.

The tables the kernels read beside it are normalised by :func:`_tables`: ``lut`` (L,) or
(K, L) receptor signal tables on ``linspace(-1, 1, L)`` of cos θ, eye e reading row
``eye_params[e, P_LUT]``, and ``cubes`` (C, 6, n, n) full-frame tables
(:func:`renderer.kernels.tables.cube_table`).  Not for: any compiled code, poses, fields
or files.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np


PARAMS = 20
P_Q, P_NASAL, P_TEMPORAL, P_DORSAL, P_VENTRAL, P_SIGN, P_FULL, P_E2 = range(8)
P_MODE, P_LUT, P_CUBE = 8, 9, 10
P_RB0, P_RB1, P_RB2 = 11, 12, 13       # ratio: population B axis = RB0·a + RB1·e1 + RB2·e2
P_COS_PSI, P_SIN_PSI = 14, 15          # full frame: molecular x = cos ψ·e1 + sin ψ·e2
P_COS_IN, P_COS_OUT = 16, 17           # cos(smallest), cos(largest) half-width



class KernelMode(NamedTuple):
    """One per-pixel computation the kernels know: its code in ``eye_params[:, P_MODE]``,
    whether it reads a full-frame cube table (else the cos θ table), and what it does."""

    code: int
    cube: bool
    description: str


#: The kernels' receptor modes, written once.  Adding one: a line here (the next code),
#: its branch in the per-receptor signal (``pixels._frame_signal`` and ``_signal``, the
#: row passes' ``rows._row_signal``, the twin ``twins.signal_numpy``, and the
#: predictions' table kinds in ``predict.fisher.make_setup``), and an alignment class in
#: :mod:`renderer.eye.alignment` whose ``mode`` is the code and whose ``examples`` reach
#: it; tests/kernels/test_modes.py then checks the kernels against the twin for it.
KERNEL_MODES = {
    "axial": KernelMode(0, False, "one cos θ table lookup: θ between the receptor axis and "
                                  "the field (normal, chief-ray, tilt, disorder, random "
                                  "in-plane angle)"),
    "ratio": KernelMode(1, False, "s_A/s_B of two populations, axes a and "
                                  "RB0·a + RB1·e1 + RB2·e2"),
    "full-meridian": KernelMode(2, True, "cube-table lookup of the field in a molecular frame, "
                                         "x at ψ from the local meridian"),
    "full-fixed": KernelMode(3, True, "cube-table lookup of the field in a molecular frame, "
                                      "x at ψ from the eye's dorsal direction projected"),
}
MODE_AXIAL = KERNEL_MODES["axial"].code
MODE_RATIO = KERNEL_MODES["ratio"].code
MODE_FULL_MERIDIAN = KERNEL_MODES["full-meridian"].code
MODE_FULL_FIXED = KERNEL_MODES["full-fixed"].code
#: Codes of the modes that read a cube table.
CUBE_MODES = tuple(m.code for m in KERNEL_MODES.values() if m.cube)

_NO_CUBES = np.zeros((1, 6, 2, 2), np.float32)


def pack_eyes(layout, lut_rows=None, cube_rows=None):
    """Pack a :class:`renderer.eye.Layout` into (R_eye_head (E,3,3), eye_params (E,PARAMS)).

    Parameters
    ----------
    layout : Layout
    lut_rows, cube_rows : sequence of int, optional
        Per eye, the row of the response-table stack and the cube index it reads
        (default 0 for every eye: one shared table).
    """
    E = len(layout.eyes)
    R = np.empty((E, 3, 3))
    P = np.zeros((E, PARAMS))
    for k, eye in enumerate(layout.eyes):
        R[k] = eye.R_head_eye.T
        hw = eye.half_widths_rad
        q, e2 = eye.axis_geometry
        P[k, P_Q] = q
        P[k, P_NASAL:P_VENTRAL + 1] = hw
        P[k, P_SIGN] = eye.nasal_sign
        P[k, P_FULL] = 1.0 if hw.min() >= math.pi - 1e-12 else 0.0
        P[k, P_E2] = e2
        P[k, P_COS_IN] = math.cos(hw.min())
        P[k, P_COS_OUT] = math.cos(hw.max())
        al = eye.alignment
        P[k, P_MODE] = al.mode
        P[k, P_COS_PSI] = 1.0
        for slot, value in al.kernel_slots().items():
            P[k, slot] = value
        P[k, P_LUT] = 0 if lut_rows is None else lut_rows[k]
        P[k, P_CUBE] = 0 if cube_rows is None else cube_rows[k]
    return np.ascontiguousarray(R), P


def _fold(R_eye_head, R_head_view):
    """R_eye_view = R_eye_head @ R_head_view per eye, (E, 3, 3): the kernels rotate each
    view direction once, straight into every eye's frame."""
    return np.ascontiguousarray(np.einsum("eij,jk->eik", np.asarray(R_eye_head, np.float64),
                                          np.asarray(R_head_view, np.float64)))


def _tables(eye_params, lut, cubes):
    lut = np.asarray(lut, dtype=np.float64)
    if lut.ndim == 1:
        lut = lut[None, :]
    lut = np.ascontiguousarray(lut)
    rows = eye_params[:, P_LUT]
    if rows.size and (rows.min() < 0 or rows.max() >= lut.shape[0]):
        raise ValueError(f"eye_params ask for response-table rows up to {int(rows.max())} but "
                         f"lut has {lut.shape[0]} row(s); pass the stacked tables from "
                         f"pipeline.prepare (ShotInputs.lut)")
    needs_cube = np.isin(eye_params[:, P_MODE], CUBE_MODES)
    if cubes is None:
        if needs_cube.any():
            raise ValueError("a full-frame alignment needs its cube-map tables: pass "
                             "cubes=ShotInputs.cubes")
        cubes = _NO_CUBES
    # float32 tables (as pipeline.prepare stores them) are read as they are
    cubes = np.ascontiguousarray(cubes, dtype=np.float32 if np.asarray(cubes).dtype == np.float32
                                 else np.float64)
    if needs_cube.any() and eye_params[needs_cube, P_CUBE].max() >= cubes.shape[0]:
        raise ValueError("eye_params ask for a cube-map table that is not in cubes")
    return lut, cubes
