"""On-disk cache of computed response tables, keyed by a hash of every parameter.

Entries are ``.npz`` files named by the SHA-256 of a canonical JSON of the parameters
(sorted keys, floats by ``repr``) in ``$MAGRETINA_CACHE`` or ``~/.cache/magretina``.
Writers save to a unique temporary name in the same directory and ``os.replace`` it
into place, so readers only ever see complete files and concurrent writers of the
same key simply race to install identical content.  This module stores arrays and a
JSON metadata string; it does not compute anything.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
from pathlib import Path

import numpy as np

from ..errors import MagretinaError
from ..inputs import load_npz_checked
from ..io import atomic_write_bytes


def cache_root() -> Path:
    """The cache directory: $MAGRETINA_CACHE, else ~/.cache/magretina."""
    env = os.environ.get("MAGRETINA_CACHE")
    return Path(env).expanduser() if env else Path.home() / ".cache" / "magretina"


def cache_key(params: dict) -> str:
    """SHA-256 hex digest of a canonical JSON rendering of ``params``."""
    text = json.dumps(params, sort_keys=True, separators=(",", ":"), default=_json_default)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _json_default(o):
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, (np.floating, np.integer)):
        return o.item()
    raise TypeError(f"not JSON-serialisable: {type(o).__name__}")


def save_npz_atomic(path, arrays: dict, meta: dict) -> Path:
    """Write ``arrays`` plus ``meta`` (JSON string under key 'meta_json') atomically.

    The file appears under ``path`` only when complete (see
    :func:`renderer.io.atomic_write_bytes`).
    """
    buf = io.BytesIO()
    np.savez(buf, meta_json=np.array(json.dumps(meta, default=_json_default)), **arrays)
    atomic_write_bytes(path, buf.getvalue())
    return Path(path)


def load_npz(path):
    """(arrays dict, meta dict) from a file written by :func:`save_npz_atomic`."""
    z = load_npz_checked(path, "response table")
    arrays = {k: v for k, v in z.items() if k != "meta_json"}
    try:
        meta = json.loads(str(z["meta_json"])) if "meta_json" in z else {}
    except (ValueError, RecursionError):
        raise MagretinaError(f"response table {path}: its meta_json is not valid JSON") from None
    if not isinstance(meta, dict):
        raise MagretinaError(f"response table {path}: its meta_json is not a JSON object")
    return arrays, meta


def _entry(kind: str, key: str) -> Path:
    return cache_root() / kind / f"{key}.npz"


def lookup(kind: str, key: str):
    """(arrays, meta) of a cached entry, or None if absent or unreadable."""
    p = _entry(kind, key)
    if not p.is_file():
        return None
    try:
        return load_npz(p)
    except (OSError, ValueError, KeyError):  # MagretinaError is a ValueError
        return None  # a damaged entry is recomputed and replaced


def store(kind: str, key: str, arrays: dict, meta: dict) -> Path:
    """Install an entry atomically; returns its path."""
    return save_npz_atomic(_entry(kind, key), arrays, meta)


def clear_cache(kind: str | None = None) -> int:
    """Delete cached entries (all kinds, or one); returns how many files were removed."""
    root = cache_root()
    dirs = [root / kind] if kind else ([p for p in root.iterdir() if p.is_dir()] if root.is_dir() else [])
    n = 0
    for d in dirs:
        if not d.is_dir():
            continue
        for f in d.iterdir():
            if f.suffix in (".npz", ".tmp") and f.is_file():
                try:
                    f.unlink()
                    n += 1
                except FileNotFoundError:
                    pass
    return n
