"""A lab-fixed RF table read as a receptor response (``kind = "rf-lab-table"``).

See :class:`LabRFResponse`.  It only holds the table and the coil direction; the
per-receptor geometry is evaluated by :mod:`renderer.pipeline`.
"""

from __future__ import annotations

import os

import numpy as np

from ..errors import MagretinaError
from .rf_lab_table import RFLabTable


class LabRFResponse:
    """A lab-fixed RF table used as the receptor response of a study or a render.

    The receptor signal is Φ_S(b̂₀, b̂₁) of the table
    (:class:`renderer.response.rf_lab_table.RFLabTable`) at the static field's direction
    b̂₀ and the RF coil's direction b̂₁, both expressed in each receptor's own molecular
    frame; the coil direction is stated in the world (NED) frame and set per
    frame with :meth:`with_rf` (in a study: the ``direction`` of the ``rf-on`` step that
    selects this response).  The renderer evaluates it per pixel
    (:func:`renderer.pipeline.prepare` sees ``lab_rf``); it has no axial table, because
    Φ_S depends on the receptor's full orientation relative to both fields.  The table
    holds one |B₀|, B₁ and ν; the presented field's magnitude is not read.  A model
    prediction of the radical-pair hypothesis, not a measurement.

    Parameters
    ----------
    path : str
        A table written by ``magretina rf-lab-table`` (:meth:`~renderer.response.rf_lab_table.RFLabTable.save`).
    """

    axial = False
    lab_rf = True

    def __init__(self, path):
        self.path = os.fspath(path)
        self.table = RFLabTable.load(self.path)
        self.rf_ned = None

    def with_rf(self, direction_ned) -> "LabRFResponse":
        """A copy reading the coil direction ``direction_ned`` (3 numbers, world NED; need
        not be normalised, must not be zero)."""
        d = np.asarray(direction_ned, dtype=np.float64).reshape(3)
        n = float(np.linalg.norm(d))
        if not (np.all(np.isfinite(d)) and n > 0):
            raise MagretinaError(f"RF direction {list(d)}: must be 3 finite numbers, not all 0")
        out = object.__new__(LabRFResponse)
        out.path, out.table, out.rf_ned = self.path, self.table, d / n
        return out

    def evaluate_pair(self, static_mol, rf_mol) -> np.ndarray:
        """Φ_S at (N, 3) molecular-frame directions of B₀ and B₁."""
        return self.table.evaluate(static_mol, rf_mol)

    def describe(self) -> dict:
        t = self.table
        return {"kind": "rf-lab-table", "path": os.path.basename(self.path),
                "field_uT": t.field_T * 1e6, "rf_amplitude_nT": t.amplitude_T * 1e9,
                "rf_frequency_MHz": t.frequency_Hz * 1e-6, "lmax_static": t.lmax_static,
                "lmax_rf": t.lmax_rf, "fit_residual_max": t.residual_max,
                "rf_direction_ned": None if self.rf_ned is None else self.rf_ned.tolist()}
