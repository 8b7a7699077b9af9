"""The rendering kernels: view direction → eye → receptor frame → response → modulation,
and the scene lookup, as numba functions on plain arrays with plain NumPy twins.

For: the public entry points under one name (``from renderer import kernels``), so callers
need not know which module holds what.  The package, bottom to top:

* :mod:`~renderer.kernels.layout`: the packed-eye arrays (``pack_eyes``, ``P_*`` slots,
  ``MODE_*`` codes) and the normalisation of the tables every entry point shares;
* :mod:`~renderer.kernels.tables`: equirectangular cos/sin tables, grid directions and
  cube-map tables;
* :mod:`~renderer.kernels.leaf`: compiled helpers shared by several families;
* :mod:`~renderer.kernels.pixels`: per-pixel kernels for explicit directions;
* :mod:`~renderer.kernels.rows`: row passes of equirectangular views;
* :mod:`~renderer.kernels.sampling`: equirectangular views over a resampled scene;
* :mod:`~renderer.kernels.filtering`: the scene's mipmap pyramid and the footprint filter;
* :mod:`~renderer.kernels.codes`: display codes by threshold tables and the luminance
  images of the display metrics;
* :mod:`~renderer.kernels.twins`: the NumPy reference twins.

Everything here takes plain arrays and imports only numpy, numba and the bottom layer
of ``renderer``; it knows nothing of poses, fields, eyes as objects, views or files.
"""

from __future__ import annotations

import os

from . import _cache

# before any kernel module is imported (and so before numba loads a cached kernel): drop
# cache entries compiled from other versions of this package's files
_cache.invalidate_stale(os.path.dirname(os.path.abspath(__file__)))

from .layout import (CUBE_MODES, KERNEL_MODES, MODE_AXIAL, MODE_FULL_FIXED, MODE_FULL_MERIDIAN,
                     MODE_RATIO, P_COS_IN, P_COS_OUT, P_COS_PSI, P_CUBE, P_DORSAL, P_E2, P_FULL, P_LUT, P_MODE,
                     P_NASAL, P_Q, P_RB0, P_RB1, P_RB2, P_SIGN, P_SIN_PSI, P_TEMPORAL,
                     P_VENTRAL, PARAMS, pack_eyes)
from .codes import (clip_unit_float64, code_luminance, dither_codes, grey_pattern,
                    threshold_codes)
from .filtering import FILTERS, NTAPS_MAX, Pyramid, build_pyramid, ntaps_for
from .leaf import ATAN_COEFFS, ATAN_MARGIN, FASTMATH, fast_angle
from .pixels import composite_dirs, pattern_dirs
from .rows import COS_MARGIN, COS_SQRT_COEFFS, composite_world_aligned, pattern_equirect
from .sampling import ATAN2_COEFFS, composite_resampled
from .tables import cube_nodes, cube_table, equirect_dirs, equirect_tables
from .twins import (cube_lookup_numpy, grid_tangents_numpy, lut_lookup_numpy, mode_axes_numpy,
                    modulate_numpy, normal_coefficients, pattern_numpy, ray_parameter,
                    receptor_frames_numpy, sample_equirect_numpy, sample_filtered_numpy,
                    sample_mipmap_numpy, scene_jacobian_numpy, signal_numpy, visible_numpy)

__all__ = [
    "ATAN2_COEFFS", "CUBE_MODES", "KERNEL_MODES", "ATAN_COEFFS", "ATAN_MARGIN", "COS_MARGIN", "COS_SQRT_COEFFS", "FASTMATH",
    "MODE_AXIAL", "MODE_FULL_FIXED", "MODE_FULL_MERIDIAN", "MODE_RATIO", "PARAMS", "P_COS_IN",
    "P_COS_OUT", "P_COS_PSI", "P_CUBE", "P_DORSAL", "P_E2", "P_FULL", "P_LUT", "P_MODE",
    "P_NASAL", "P_Q", "P_RB0", "P_RB1", "P_RB2", "P_SIGN", "P_SIN_PSI", "P_TEMPORAL",
    "P_VENTRAL",
    "composite_dirs", "composite_resampled", "composite_world_aligned", "cube_lookup_numpy",
    "cube_nodes", "cube_table", "equirect_dirs", "equirect_tables", "fast_angle",
    "lut_lookup_numpy", "mode_axes_numpy", "modulate_numpy", "normal_coefficients",
    "pack_eyes", "pattern_dirs", "pattern_equirect", "pattern_numpy", "ray_parameter",
    "receptor_frames_numpy", "sample_equirect_numpy", "signal_numpy", "visible_numpy",
    "FILTERS", "NTAPS_MAX", "Pyramid", "build_pyramid", "grid_tangents_numpy", "ntaps_for",
    "sample_filtered_numpy", "sample_mipmap_numpy", "scene_jacobian_numpy",
    "clip_unit_float64", "code_luminance", "dither_codes", "grey_pattern", "threshold_codes",
]
