"""Studies: one TOML file describing a batch of shots, run resumably, exported for labs.

Pipeline: :mod:`.config` (read and check the file) -> :mod:`.expand` (sweep axes to
shots, seeds) -> :mod:`.sequences` (frames within a shot) -> :mod:`.build` (library
objects, shared per geometry) -> :mod:`.runner` with :mod:`.executors` and
:mod:`.worker` (render what is missing) -> :mod:`.outputs` (folder, sidecar,
manifest), :mod:`.exports` (videos, previews, tables, NetCDF), :mod:`.metrics`
(per-frame numbers, provider registry).  ``magretina run`` and ``magretina
new-study`` are thin wrappers.  Outputs are predictions of a model, not
measurements.

Configuration tables of registered classes pass through: ``[views.NAME]`` keys are
checked against the dataclass fields of ``renderer.views.REGISTRY[kind]``, ``[response]``
against the constructor of ``renderer.response.REGISTRY[kind]``, ``[layout.eyes.NAME]``
against ``Eye`` fields, other ``[layout]`` keys against ``Layout`` fields; a new view,
response or eye option needs no change here.  ``[layout] alignment`` (a mode name or a
table) sets every eye's hypothesis, ``[layout.eyes.NAME] alignment`` one eye's, and
``[layout.eye_offsets.NAME]`` the shot's eye movement (applied last, through
``Layout.moved``); all sit inside ``layout``, so they are part of the resources key and
sweepable (``key = "layout.alignment"``).

Byte stability: manifest entries are normalised through JSON before tables are built, so
a first run and a resumed run write identical CSV and NetCDF bytes; ``study.json`` is
written when the folder is claimed or the study file's bytes change, never on a plain
rerun (no timestamps anywhere).  16-bit PNGs are written and read through pypng (Pillow
decodes 16-bit RGB to 8 bits).
"""

from .config import Study, validate
from .expand import Plan, Shot, load_study, plan
from .runner import dry_run, run_study

__all__ = ["Study", "load_study", "validate", "Plan", "Shot", "plan", "dry_run", "run_study"]
