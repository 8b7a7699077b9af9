"""Shared test configuration: non-interactive plotting, a fixed hypothesis profile."""

import os

os.environ.setdefault("MPLBACKEND", "Agg")

from hypothesis import settings  # noqa: E402

settings.register_profile("ci", max_examples=40, deadline=None, derandomize=True)
settings.load_profile("ci")
