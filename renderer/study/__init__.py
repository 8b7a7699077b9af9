"""Studies: one TOML file describing a batch of shots, run resumably, exported for labs.

Pipeline: :mod:`.config` (read and check the file) -> :mod:`.expand` (sweep axes to
shots, seeds) -> :mod:`.sequences` (frames within a shot) -> :mod:`.build` (library
objects, shared per geometry) -> :mod:`.runner` with :mod:`.executors` and
:mod:`.worker` (render what is missing) -> :mod:`.outputs` (folder, sidecar,
manifest), :mod:`.exports` (videos, previews, tables, NetCDF), :mod:`.metrics`
(per-frame numbers, provider registry).  ``magretina run`` and ``magretina
new-study`` are thin wrappers.  Outputs are predictions of a model, not
measurements.
"""

from .config import Study, validate
from .expand import Plan, Shot, load_study, plan
from .runner import dry_run, run_study

__all__ = ["Study", "load_study", "validate", "Plan", "Shot", "plan", "dry_run", "run_study"]
