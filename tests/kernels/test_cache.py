"""The source-hash check that keeps numba's on-disk cache of renderer.kernels consistent.

numba's ``cache=True`` compares only the source file of the function it loads (numba
documentation, "Notes on caching": "Changes in other files containing functions called by
the cached function are not detected"); renderer.kernels._cache deletes the package's cache
entries when any of its files changed.  The end-to-end test reproduces numba's documented
limitation on a two-module package and checks that the check removes the stale result.
"""

import os
import subprocess
import sys
import textwrap

import pytest

from renderer.kernels import _cache

REPO = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def _package(tmp_path, value):
    pkg = tmp_path / "twomod"
    pkg.mkdir(exist_ok=True)
    (pkg / "__init__.py").write_text(textwrap.dedent("""
        import os
        if not os.environ.get("TWOMOD_NO_CHECK"):
            from renderer.kernels import _cache
            _cache.invalidate_stale(os.path.dirname(os.path.abspath(__file__)))
    """))
    (pkg / "a.py").write_text(textwrap.dedent("""
        from numba import njit
        from .b import g

        @njit(cache=True)
        def f():
            return g() + 0
    """))
    (pkg / "b.py").write_text(textwrap.dedent(f"""
        from numba import njit

        @njit(cache=True)
        def g():
            return {value}
    """))
    return pkg


def _run(tmp_path, env_extra):
    env = {k: v for k, v in os.environ.items() if k != "NUMBA_CACHE_DIR"}
    env.update(env_extra)
    env["PYTHONPATH"] = os.pathsep.join([str(tmp_path), REPO])
    out = subprocess.run([sys.executable, "-c", "import twomod.a as a; print(a.f())"],
                         cwd=str(tmp_path), env=env, capture_output=True, text=True, check=True)
    return int(out.stdout.strip())


@pytest.mark.parametrize("where", ["in-tree", "NUMBA_CACHE_DIR"])
def test_an_edit_in_another_module_recompiles_the_caller(tmp_path, where):
    """A cached caller whose callee's file was edited must return the new value.  Without
    the check numba returns the stale one (its documented limitation, reproduced first)."""
    env = {"NUMBA_CACHE_DIR": str(tmp_path / "cache")} if where == "NUMBA_CACHE_DIR" else {}
    _package(tmp_path, 1)
    assert _run(tmp_path, dict(env, TWOMOD_NO_CHECK="1")) == 1
    _package(tmp_path, 2)
    assert _run(tmp_path, dict(env, TWOMOD_NO_CHECK="1")) == 1  # numba alone: stale
    assert _run(tmp_path, env) == 2
    _package(tmp_path, 3)
    assert _run(tmp_path, env) == 3


def _entries(d):
    return sorted(n for n in os.listdir(d) if n.endswith((".nbi", ".nbc")))


def test_stale_entries_are_removed_and_fresh_ones_kept(tmp_path):
    """Stamp missing or different: every *.nbi/*.nbc goes, other files stay, the stamp is
    renewed; stamp equal: nothing is touched."""
    pkg = tmp_path / "pkg"
    pkg.mkdir()
    (pkg / "a.py").write_text("x = 1\n")
    (pkg / "b.py").write_text("y = 2\n")
    cache = tmp_path / "cache"
    cache.mkdir()
    for n in ("a.f-3.py311.nbi", "a.f-3.py311.1.nbc", "a.cpython-311.pyc"):
        (cache / n).write_bytes(b"old")
    assert _cache.invalidate_stale(str(pkg), str(cache))
    assert _entries(cache) == [] and (cache / "a.cpython-311.pyc").exists()
    stamp = (cache / _cache.STAMP).read_text().strip()
    assert stamp == _cache.source_digest(str(pkg))
    (cache / "a.f-3.py311.nbi").write_bytes(b"new")
    assert not _cache.invalidate_stale(str(pkg), str(cache))
    assert _entries(cache) == ["a.f-3.py311.nbi"]
    (pkg / "b.py").write_text("y = 3\n")
    assert _cache.invalidate_stale(str(pkg), str(cache))
    assert _entries(cache) == []
    assert (cache / _cache.STAMP).read_text().strip() != stamp
    assert [n for n in os.listdir(cache) if n.endswith(".tmp")] == []


def test_unwritable_cache_is_left_alone(tmp_path, monkeypatch):
    """A cache directory that cannot be written (read-only install): no error, no change,
    and the stamp is not renewed (a later run with write access still cleans up)."""
    pkg = tmp_path / "pkg"
    pkg.mkdir()
    (pkg / "a.py").write_text("x = 1\n")
    cache = tmp_path / "cache"
    cache.mkdir()
    (cache / "a.f-3.py311.nbi").write_bytes(b"old")

    def refuse(*args, **kwargs):
        raise PermissionError("read-only")

    monkeypatch.setattr(_cache.os, "remove", refuse)
    assert not _cache.invalidate_stale(str(pkg), str(cache))
    assert _entries(cache) == ["a.f-3.py311.nbi"]
    assert not (cache / _cache.STAMP).exists()


def test_the_package_cache_is_stamped_with_its_sources():
    """After import, the stamp beside renderer.kernels' numba cache is its source hash."""
    pkg = os.path.dirname(os.path.abspath(_cache.__file__))
    where = _cache.numba_cache_dir(pkg)
    with open(os.path.join(where, _cache.STAMP), encoding="ascii") as fh:
        assert fh.read().strip() == _cache.source_digest(pkg)
