"""Eyes in the head, their optics and receptor axes, and layouts of several eyes."""

from .eye import Eye
from .layout import Layout, load_layout, parse_layout, preset_names

__all__ = ["Eye", "Layout", "load_layout", "parse_layout", "preset_names"]
