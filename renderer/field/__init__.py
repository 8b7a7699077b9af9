"""Geomagnetic field models: a site and date to a :class:`FieldVector` in local NED.

``MODELS`` maps the names used on the command line and in study files to model
functions ``f(lat_deg, lon_deg, alt_km, date) -> FieldVector``.  Adding a model is
one new file and one line here.
"""

from ..errors import MagretinaError
from .base import IGRF_VALID, FieldVector, parse_date
from .dipole import dipole
from .fixed import fixed
from .igrf import igrf

MODELS = {
    "igrf": igrf,
    "dipole": dipole,
}


def at_site(model, lat_deg, lon_deg, alt_km=0.0, date="2026-06-01") -> FieldVector:
    """Evaluate the named site model (``"igrf"`` or ``"dipole"``)."""
    try:
        fn = MODELS[model]
    except KeyError:
        raise MagretinaError(f"unknown field model {model!r}; allowed: {', '.join(MODELS)}") from None
    return fn(lat_deg, lon_deg, alt_km, date)


__all__ = ["FieldVector", "igrf", "dipole", "fixed", "at_site", "MODELS", "IGRF_VALID", "parse_date"]
