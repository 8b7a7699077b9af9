"""magretina: hypothesis stimuli and predictions for a light-dependent radical-pair
magnetic compass in an animal's visual field.

The images and numbers are predictions of a model under stated assumptions, for
research; they are not observations of animal perception.

Top-level API::

    from renderer.field import igrf, dipole, fixed
    from renderer.pose import Pose
    from renderer.eye import Eye, load_layout
    from renderer.response import Legendre, Tabulated
    from renderer.views import WorldPanorama, HeadPanorama, EyeDisc
    renderer.render_pattern(field, pose, layout, response, view)
    renderer.render(field, pose, layout, response, view, scene=..., gain=...)

The four rendering functions are resolved on first use (module ``__getattr__``), so
``import renderer.field`` or the command line's start-up does not load numba and the
kernels.  The layer order of the subpackages is written in ``pyproject.toml``
(``[tool.importlinter]``) and checked by ``tests/test_layers.py``.
"""

import importlib

from .version import __version__

#: Public name -> module that defines it (imported when the name is first used).
_LAZY = {
    "render": "renderer.pipeline",
    "render_pattern": "renderer.pipeline",
    "render_signal": "renderer.pipeline",
    "visual_field_mean": "renderer.pipeline",
}

__all__ = [*_LAZY, "__version__"]


def __getattr__(name):
    try:
        module = _LAZY[name]
    except KeyError:
        raise AttributeError(f"module 'renderer' has no attribute {name!r}") from None
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
