"""Shared test configuration: non-interactive plotting, a private table cache, a fixed
hypothesis profile."""

import os
import tempfile

os.environ.setdefault("MPLBACKEND", "Agg")
# Response-table caches go to a throw-away folder, never the user's ~/.cache.
os.environ["MAGRETINA_CACHE"] = tempfile.mkdtemp(prefix="magretina-test-cache-")

from hypothesis import settings  # noqa: E402

settings.register_profile("ci", max_examples=40, deadline=None, derandomize=True)
settings.load_profile("ci")
