"""Parsing of radio-frequency field tables in study files and scripts (trade units).

Turns a TOML/JSON table such as ``{amplitude_nT = 480, frequency_MHz = 1.315,
direction = [0, 0, 1]}`` into the plain-data :class:`renderer.spin.rf.RFField` or
:class:`renderer.spin.rf.RFNoise`, naming ``where.key`` on every problem.  It checks
and converts only; the physics is in :mod:`renderer.spin.rf`, and the timeline's
``rf-on`` step schema in :mod:`renderer.study.sequences`.
"""

from __future__ import annotations

import math

from ..errors import ConfigError, MagretinaError
from ..spin.rf import RFField, RFNoise

_RF_KEYS = {"amplitude_nT", "frequency_MHz", "direction", "phase_deg"}
_NOISE_KEYS = {"rms_nT", "f_min_MHz", "f_max_MHz", "n_components", "direction", "seed"}


def rf_from_config(table: dict, where="rf"):
    """An RFField or RFNoise from a configuration table in the trade's units.

    Keys: ``amplitude_nT``, ``frequency_MHz``, ``direction`` (3 numbers, in the frame the
    caller states, e.g. the world NED frame of a study), ``phase_deg`` — or, for noise,
    ``rms_nT``, ``f_min_MHz``, ``f_max_MHz``, ``n_components``, ``direction``, ``seed``.
    Unknown keys and bad values raise MagretinaError naming ``where.key``.
    """
    if not isinstance(table, dict):
        raise MagretinaError(f"{where} must be a table, got {type(table).__name__}")
    noise = "rms_nT" in table
    allowed = _NOISE_KEYS if noise else _RF_KEYS
    unknown = sorted(set(table) - allowed)
    if unknown:
        raise ConfigError([f"{where}.{k}: unknown key; allowed {', '.join(sorted(allowed))}"
                           for k in unknown])
    try:
        if noise:
            return RFNoise(float(table["rms_nT"]) * 1e-9, float(table["f_min_MHz"]) * 1e6,
                           float(table["f_max_MHz"]) * 1e6, int(table.get("n_components", 16)),
                           tuple(table.get("direction", (1.0, 0.0, 0.0))), int(table.get("seed", 0)))
        return RFField(float(table["amplitude_nT"]) * 1e-9, float(table["frequency_MHz"]) * 1e6,
                       tuple(table.get("direction", (1.0, 0.0, 0.0))),
                       math.radians(float(table.get("phase_deg", 0.0))))
    except KeyError as exc:
        raise MagretinaError(f"{where}.{exc.args[0]} is required") from None
    except MagretinaError as exc:
        raise MagretinaError(f"{where}: {exc}") from None
    except (TypeError, ValueError) as exc:
        raise MagretinaError(f"{where}: bad value ({exc})") from None
