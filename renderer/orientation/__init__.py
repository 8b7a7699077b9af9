"""Orientation experiments: predicted headings under a hypothesis and the circular
statistics of observed headings.

Submodules: :mod:`.statistics` (descriptive statistics and tests of headings),
:mod:`.headings` (reading a headings CSV), :mod:`.model` (the predicted distribution
of chosen headings per condition from the receptor-count likelihood of
:mod:`renderer.predict`), :mod:`.comparison` (log-likelihood of observed headings
under each hypothesis), :mod:`.power` (animals needed, by simulation of the test),
:mod:`.plots` (circular plots).  Predicted headings are predictions of a model of a
hypothesis, not measurements.  The stable API used by outside scripts::

    from renderer.orientation import describe, rayleigh_test, v_test
"""

from .statistics import describe, rayleigh_test, v_test

__all__ = ["describe", "rayleigh_test", "v_test"]
