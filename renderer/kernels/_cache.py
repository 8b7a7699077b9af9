"""Keeps numba's on-disk cache of this package consistent across its modules.

For: numba's ``cache=True`` checks only the source file of the function it loads, so a
cached kernel in one module keeps the machine code of a helper it inlined or linked from
another module after that helper's file was edited.  :func:`invalidate_stale` hashes the
sources of every module in the package and, when the hash differs from the stamp stored
beside numba's cache files, deletes the package's cache entries (``*.nbi``, ``*.nbc``)
before any kernel loads, then stores the new stamp (atomically).  It runs once, at import
of :mod:`renderer.kernels`.  Where the cache directory cannot be written (a read-only
install) it does nothing and numba's own cache-directory logic applies.  Not for: the
response-table caches (:mod:`renderer.pipeline`) or any compiled code.
"""

from __future__ import annotations

import hashlib
import os
import tempfile

from numba.core import config

try:  # numba's copy of appdirs (its user-wide cache location); internal, so optional
    from numba.misc.appdirs import AppDirs
except ImportError:  # pragma: no cover - depends on the numba version
    AppDirs = None

#: File name of the stamp, beside numba's index and data files.
STAMP = "magretina-kernels.stamp"


def source_digest(pkg_dir) -> str:
    """SHA-256 (hex) over the names and bytes of every ``*.py`` file in ``pkg_dir``."""
    h = hashlib.sha256()
    for name in sorted(os.listdir(pkg_dir)):
        if name.endswith(".py"):
            h.update(name.encode() + b"\0")
            with open(os.path.join(pkg_dir, name), "rb") as fh:
                h.update(fh.read())
            h.update(b"\0")
    return h.hexdigest()


def _writable(path) -> bool:
    try:
        os.makedirs(path, exist_ok=True)
        tempfile.TemporaryFile(dir=path).close()
    except OSError:
        return False
    return True


def numba_cache_dir(pkg_dir):
    """The directory numba caches this package's functions in, as numba chooses it:
    ``NUMBA_CACHE_DIR``/<dir>_<sha1 of the package path> if set, else the package's
    ``__pycache__`` if writable, else the user-wide numba cache; None if none applies."""
    src = os.path.abspath(pkg_dir)
    sub = os.path.basename(src) + "_" + hashlib.sha1(src.encode()).hexdigest()
    if config.CACHE_DIR:
        return os.path.join(config.CACHE_DIR, sub)
    in_tree = os.path.join(src, "__pycache__")
    if _writable(in_tree):
        return in_tree
    if AppDirs is None:
        return None
    return os.path.join(AppDirs(appname="numba", appauthor=False).user_cache_dir, sub)


def invalidate_stale(pkg_dir, cache_dir=None) -> bool:
    """Delete the package's numba cache entries if its sources changed since the stamp.

    Parameters
    ----------
    pkg_dir : str
        The package directory (its ``*.py`` files are hashed).
    cache_dir : str, optional
        numba's cache directory for the package (default :func:`numba_cache_dir`).

    Returns
    -------
    bool
        True if stale entries were deleted and the new stamp written; False if the stamp
        matched, or the directory could not be written (then nothing is changed, and the
        stamp is not renewed, so a later run with write access still cleans up).
    """
    digest = source_digest(pkg_dir)
    path = cache_dir if cache_dir is not None else numba_cache_dir(pkg_dir)
    if path is None:
        return False
    stamp = os.path.join(path, STAMP)
    try:
        with open(stamp, encoding="ascii") as fh:
            if fh.read().strip() == digest:
                return False
    except (OSError, ValueError):
        pass
    try:
        os.makedirs(path, exist_ok=True)
        for name in os.listdir(path):
            if name.endswith((".nbi", ".nbc")):
                try:
                    os.remove(os.path.join(path, name))
                except FileNotFoundError:  # another process cleaned it first
                    pass
        fd, tmp = tempfile.mkstemp(dir=path, prefix=STAMP, suffix=".tmp")
        try:
            with os.fdopen(fd, "w", encoding="ascii") as fh:
                fh.write(digest + "\n")
            os.replace(tmp, stamp)
        except BaseException:
            try:
                os.remove(tmp)
            except OSError:
                pass
            raise
    except OSError:
        return False
    return True
