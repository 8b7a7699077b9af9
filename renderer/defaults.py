"""Defaults shared by the command line, the study file, the demo and the library.

One place for values a user meets in several commands, so ``render``, ``predict``,
``run`` and ``demo`` agree.  Not for physical constants or published parameters:
those live beside the model that uses them, with their source.
"""

#: Modulation gain used when none is given: m = gain·(s/⟨s⟩ − 1).  A display choice
#: that exaggerates the predicted modulation so that it is visible on a screen; it is
#: not a physiological value (the demo, ``render``, ``predict`` and a study's
#: ``[render] gain`` all default to it).
DEFAULT_GAIN = 2.0
