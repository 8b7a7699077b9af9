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
"""

__version__ = "0.1.0"

from .pipeline import render, render_pattern, render_signal, visual_field_mean  # noqa: E402

__all__ = ["render", "render_pattern", "render_signal", "visual_field_mean", "__version__"]
