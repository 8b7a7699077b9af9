"""Geomagnetic field models: a site and date to a :class:`FieldVector` in local NED.

``MODELS`` maps the names used on the command line and in study files to
:class:`~.base.SiteModel` records; calling one is ``f(lat_deg, lon_deg, alt_km, date)
-> FieldVector``, and its ``ned_T`` evaluates many points at once.  Adding a model is
one new file (ending in ``MODEL = SiteModel(...)``) and one line here; studies, the
CLI and the tests pick it up from the registry.  ``fixed`` is a given vector, not a
site model.
"""

from ..errors import MagretinaError
from . import dipole as _dipole
from . import igrf as _igrf
from .base import IGRF_VALID, FieldVector, SiteModel, parse_date
from .dipole import dipole
from .fixed import fixed
from .igrf import igrf

MODELS = {m.name: m for m in (
    _igrf.MODEL,
    _dipole.MODEL,
)}


def at_site(model, lat_deg, lon_deg, alt_km=0.0, date="2026-06-01") -> FieldVector:
    """Evaluate the named site model (``"igrf"`` or ``"dipole"``)."""
    try:
        fn = MODELS[model]
    except KeyError:
        raise MagretinaError(f"unknown field model {model!r}; allowed: {', '.join(MODELS)}") from None
    return fn(lat_deg, lon_deg, alt_km, date)


__all__ = ["FieldVector", "SiteModel", "igrf", "dipole", "fixed", "at_site", "MODELS",
           "IGRF_VALID", "parse_date"]
