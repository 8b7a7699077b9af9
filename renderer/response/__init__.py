"""Angular responses of one receptor (see :mod:`renderer.response.base`).

Registry: ``REGISTRY`` maps a response kind used in configuration files to its class.
Adding a response model is one new file here and one line in the registry.
"""

from .base import LUT_SIZE, PRODUCTS, AxialResponse, lut_nodes
from .legendre import Legendre
from .tabulated import Tabulated
from .harmonic import SphericalHarmonic
from .spin_table import SpinTable
from .rf_lab_response import LabRFResponse

REGISTRY = {
    "legendre": Legendre,
    "tabulated": Tabulated,
    "harmonic": SphericalHarmonic,
    "spin-table": SpinTable,
}

#: Kinds a study file may also name that are not single-direction responses: a lab-fixed RF
#: table reads two directions per receptor (the static field and the RF coil), so it is
#: switched on by a timeline step that gives the coil's direction.
STUDY_ONLY = {
    "rf-lab-table": LabRFResponse,
}

__all__ = ["AxialResponse", "Legendre", "Tabulated", "LUT_SIZE", "PRODUCTS", "lut_nodes", "REGISTRY"]
