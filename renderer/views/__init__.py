"""Views: which picture is drawn and where each pixel looks.

``REGISTRY`` maps view names used in configuration files to classes; adding a view
is one new file and one line here; :func:`examples` builds each registered view from
its class's ``example`` keywords, and the view tests iterate over it.
"""

from .base import View
from .eyedisc import EyeDisc
from .panorama import HeadPanorama, WorldPanorama
from .perspective import PerspectiveScreen
from .retina import RetinaView

REGISTRY = {
    "world-panorama": WorldPanorama,
    "head-panorama": HeadPanorama,
    "eye-disc": EyeDisc,
    "perspective": PerspectiveScreen,
    "retina": RetinaView,
}



def examples() -> dict:
    """name -> a small instance of every registered view (its class's ``example``)."""
    return {name: cls(**cls.example) for name, cls in REGISTRY.items()}


__all__ = ["View", "WorldPanorama", "HeadPanorama", "EyeDisc", "PerspectiveScreen", "RetinaView",
           "REGISTRY", "examples"]
