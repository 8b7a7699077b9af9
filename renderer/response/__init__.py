"""Angular responses of one receptor (see :mod:`renderer.response.base`).

Registry: ``REGISTRY`` maps a response kind used in configuration files to its class.
Adding a response model is one new file here and one line in the registry.
"""

from .base import LUT_SIZE, PRODUCTS, AxialResponse, lut_nodes
from .legendre import Legendre
from .tabulated import Tabulated
from .harmonic import SphericalHarmonic
from .spin_table import SpinTable

REGISTRY = {
    "legendre": Legendre,
    "tabulated": Tabulated,
    "harmonic": SphericalHarmonic,
    "spin-table": SpinTable,
}

__all__ = ["AxialResponse", "Legendre", "Tabulated", "LUT_SIZE", "PRODUCTS", "lut_nodes", "REGISTRY"]
