"""Resource estimates made before anything large is allocated: memory, pixels, frames, processes.

Every command that renders or computes (``run``, ``run --dry-run``, ``render``,
``predict`` including ``--noisy``, the spin commands) first builds an
:class:`Estimate` of what it is about to need and calls :meth:`Estimate.check`,
which refuses with the figure and the limit in one line (exit status 2) instead of
ending in a ``MemoryError`` or an hour of swapping.  The limits are:

* memory: half the machine's physical memory (``os.sysconf``), or the value of the
  environment variable ``MAGRETINA_MAX_MEMORY_GB`` / the option ``--max-memory-gb``
  (either may raise or lower it);
* frames per study run: :data:`DEFAULT_MAX_FRAMES`, raised with ``MAGRETINA_MAX_FRAMES``;
* pixels per image: :data:`MAX_PIXELS` (the same as the image decoder's limit);
* worker processes: ``os.cpu_count()`` unless forced (``--force-jobs``).

The per-pixel figures are upper estimates measured with ``tracemalloc`` (peak
traced bytes of one composited frame divided by its pixels: about 13 B/px for a
world panorama, 92-100 B/px for eye discs, retinas and perspective views), rounded
up.  This module only estimates and refuses; it allocates nothing and renders
nothing.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field

from .errors import MagretinaError, check_range

MEMORY_ENV = "MAGRETINA_MAX_MEMORY_GB"
FRAMES_ENV = "MAGRETINA_MAX_FRAMES"
#: Fraction of physical memory one command may plan to use by default.
MEMORY_FRACTION = 0.5
#: Frames one study run may render by default (about a day of work at 1 frame/s).
DEFAULT_MAX_FRAMES = 100_000
#: Pixels of one image (view or scene): a 23170 x 11585 panorama.
MAX_PIXELS = 2**28
#: Bytes per pixel of one view while a frame is rendered (direction tables, signal,
#: composited float image, encoded copies); see the module docstring.
VIEW_BYTES_PER_PIXEL = 128
#: Bytes per pixel of a scene held in linear light (float32 RGB) plus its decode.
SCENE_BYTES_PER_PIXEL = 24
#: Rough rendering cost, seconds per pixel per frame (for the dry-run estimate only).
SECONDS_PER_PIXEL = 5e-8
#: Headings of one Cramér-Rao curve (a step of 0.01 degrees).
MAX_HEADINGS = 36_000


def total_memory_bytes() -> int | None:
    """Physical memory of the machine in bytes (``os.sysconf``), or None if unknown."""
    try:
        pages = os.sysconf("SC_PHYS_PAGES")
        size = os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        return None
    if pages <= 0 or size <= 0:
        return None
    return int(pages) * int(size)


def _env_number(name):
    v = os.environ.get(name)
    if v is None or v.strip() == "":
        return None
    try:
        x = float(v)
    except ValueError:
        raise MagretinaError(f"environment variable {name} = {v!r}: must be a number") from None
    if not (x > 0 and x < float("inf")):
        raise MagretinaError(f"environment variable {name} = {v!r}: must be a positive number")
    return x


#: Largest memory limit accepted (GB): a million terabytes, far above any machine, so a
#: typo such as 1e308 is refused instead of overflowing the byte count.
MAX_MEMORY_GB = 1e9


def memory_limit_bytes(max_memory_gb=None) -> int:
    """The memory a command may plan to use, bytes.

    Parameters
    ----------
    max_memory_gb : float, optional
        An explicit limit (``--max-memory-gb``), GB (10^9 bytes); wins over the
        environment variable ``MAGRETINA_MAX_MEMORY_GB``, which wins over
        :data:`MEMORY_FRACTION` of physical memory (8 GB if that is unknown).
    """
    if max_memory_gb is not None:
        x = float(max_memory_gb)
        if not (0 < x <= MAX_MEMORY_GB):
            raise MagretinaError(f"--max-memory-gb = {max_memory_gb!r}: must be a positive "
                                 f"number of GB, at most {MAX_MEMORY_GB:g}")
        return int(x * 1e9)
    x = _env_number(MEMORY_ENV)
    if x is not None:
        if not (0 < x <= MAX_MEMORY_GB):
            raise MagretinaError(f"{MEMORY_ENV} = {x!r}: must be a positive number of GB, at "
                                 f"most {MAX_MEMORY_GB:g}")
        return int(x * 1e9)
    total = total_memory_bytes()
    return int(MEMORY_FRACTION * total) if total else 8 * 10**9


def frame_limit() -> int:
    """Frames one study run may render (``MAGRETINA_MAX_FRAMES`` or the default)."""
    x = _env_number(FRAMES_ENV)
    return DEFAULT_MAX_FRAMES if x is None else int(x)


def fmt_bytes(b) -> str:
    """Bytes as a short human figure (``"1.2 GB"``); decimal units."""
    b = float(b)
    for unit, k in (("TB", 1e12), ("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if b >= k:
            return f"{b / k:.3g} {unit}"
    return f"{b:.0f} B"


def check_jobs(jobs, force=False, option="--jobs") -> int:
    """``jobs`` if it is at least 1 and at most ``os.cpu_count()`` (unless ``force``)."""
    try:
        j = int(jobs)
    except (TypeError, ValueError):
        raise MagretinaError(f"{option} {jobs!r}: must be a whole number") from None
    if j < 1:
        raise MagretinaError(f"{option} {j}: must be >= 1")
    n = os.cpu_count() or 1
    if j > n and not force:
        raise MagretinaError(f"{option} {j}: more than the {n} CPU(s) of this machine; pass "
                             f"--force-jobs to start that many processes anyway")
    return j


def check_pixels(what, height, width):
    """Refuse an image of ``height`` x ``width`` pixels above :data:`MAX_PIXELS`."""
    n = int(height) * int(width)
    if n > MAX_PIXELS:
        raise MagretinaError(f"{what}: {int(width)} x {int(height)} = {n:.3g} pixels; at most "
                             f"{MAX_PIXELS:.3g} ({MAX_PIXELS} pixels) per image")
    return n


def view_shape(kind, kw) -> tuple[int, int] | None:
    """(H, W) of a view from its class name and keywords, without building it."""
    try:
        if kind in ("world-panorama", "head-panorama", "WorldPanorama", "HeadPanorama"):
            w = int(kw.get("width", 1024))
            return max(1, w // 2), w
        if kind in ("eye-disc", "retina", "EyeDisc", "Retina"):
            s = int(kw.get("size", 512))
            return s, s
        if kind in ("perspective", "Perspective"):
            return int(kw.get("height", 480)), int(kw.get("width", 640))
    except (TypeError, ValueError, OverflowError):
        return None
    return None


@dataclass
class Estimate:
    """What a command is about to need, with the parts that make up the memory figure.

    Attributes
    ----------
    what : str
        The command or study, used in messages.
    parts : dict of str -> int
        Bytes of each large item (view tables per frame, scene, tables, ...).
    pixels : int
        Largest single image, pixels.
    frames : int
        Frames to render (0 for commands that render none).
    processes : int
        Processes that each hold the per-process parts.
    per_process : set of str
        Names of the parts each process holds its own copy of.
    """

    what: str
    parts: dict = field(default_factory=dict)
    pixels: int = 0
    frames: int = 0
    processes: int = 1
    per_process: set = field(default_factory=set)
    pixel_frames: float = 0.0

    def add(self, name, nbytes, per_process=True):
        self.parts[name] = self.parts.get(name, 0) + int(nbytes)
        if per_process:
            self.per_process.add(name)
        return self

    def add_image(self, name, height, width, bytes_per_pixel, per_process=True):
        n = check_pixels(name, height, width)
        self.pixels = max(self.pixels, n)
        return self.add(name, n * bytes_per_pixel, per_process)

    @property
    def memory_bytes(self) -> int:
        shared = sum(v for k, v in self.parts.items() if k not in self.per_process)
        own = sum(v for k, v in self.parts.items() if k in self.per_process)
        # The parent holds one copy besides the workers' copies when workers exist.
        copies = self.processes + (1 if self.processes > 1 else 0)
        return shared + own * copies

    @property
    def seconds(self) -> float:
        return self.pixel_frames * SECONDS_PER_PIXEL / max(1, self.processes)

    def describe(self) -> str:
        big = sorted(self.parts.items(), key=lambda kv: -kv[1])[:3]
        detail = ", ".join(f"{k} {fmt_bytes(v)}" for k, v in big)
        s = f"about {fmt_bytes(self.memory_bytes)} of memory"
        if self.processes > 1:
            s += f" over {self.processes} worker processes"
        if detail:
            s += f" ({detail})"
        if self.frames:
            s += f", {self.frames} frames"
        return s

    def check(self, max_memory_gb=None, check_frames=True) -> "Estimate":
        """Raise MagretinaError naming the figure and the limit if anything exceeds it."""
        lim = memory_limit_bytes(max_memory_gb)
        if self.memory_bytes > lim:
            raise MagretinaError(
                f"{self.what}: needs {self.describe()}; the limit is {fmt_bytes(lim)} (half the "
                f"machine's memory by default; raise it with {MEMORY_ENV} or --max-memory-gb)")
        if check_frames and self.frames > frame_limit():
            raise MagretinaError(
                f"{self.what}: {self.frames} frames to render; the limit is {frame_limit()} "
                f"frames per run (raise it with the environment variable {FRAMES_ENV})")
        return self


def check_frame_count(what, n_frames):
    """Refuse more than :func:`frame_limit` frames before any frame series is built."""
    lim = frame_limit()
    if n_frames > lim:
        raise MagretinaError(f"{what}: {n_frames} frames to render; the limit is {lim} frames "
                             f"per run (raise it with the environment variable {FRAMES_ENV})")


def check_headings(what, step_deg):
    """The number of headings of a 360-degree grid of ``step_deg``; refuses too many."""
    n = math.ceil(360.0 / float(step_deg))
    if n > MAX_HEADINGS:
        raise MagretinaError(f"{what} = {step_deg:g}: gives {n} headings; at most {MAX_HEADINGS} "
                             f"(a step of at least {360.0 / MAX_HEADINGS:g} degrees)")
    return n


def check_finite(option, value, lo=0.0, lo_open=True, unit=""):
    """``value`` as a finite float above ``lo`` (infinity refused); the message names it."""
    v = check_range(option, value, lo, None, lo_open=lo_open, unit=unit)
    if v == float("inf"):
        raise MagretinaError(f"{option} = {value!r}: must be a finite number")
    return v
