"""Eyes in the head, their optics, receptor alignment hypotheses, and layouts of several eyes."""

from .alignment import REGISTRY as ALIGNMENTS
from .alignment import Alignment, parse_alignment
from .eye import Eye
from .layout import (FieldBookkeeping, Layout, load_layout, parse_layout, preset_names,
                     symmetric_bookkeeping)
from .optics import ReducedEye

__all__ = ["Eye", "Layout", "load_layout", "parse_layout", "preset_names", "Alignment",
           "parse_alignment", "ALIGNMENTS", "FieldBookkeeping", "symmetric_bookkeeping",
           "ReducedEye"]
