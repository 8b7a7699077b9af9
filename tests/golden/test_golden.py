"""Identity of a fixed set of outputs across refactorings.

The records in ``golden.json`` were made from the code before a change; every image, table
and metric here must reproduce them: integer outputs (8- and 16-bit PNG pixels) and text
outside its numbers byte for byte, floating-point values to within floating-point noise
(see ``cases.fingerprint`` and ``cases.matches`` for what is recorded and the tolerances).
Source of truth: the project's own earlier outputs (this is a regression guard, not an
external check; the physics is checked against outside references in the other test
folders).  A change that alters outputs on purpose re-records with
``python tests/golden/record.py`` in the same commit and says why.  The records are of this
machine kind's floating-point results (x86-64, numba's LLVM); another CPU family may round
differently and would need its own recording.
"""

import json
import os

from cases import all_cases, matches

HERE = os.path.dirname(os.path.abspath(__file__))


def test_outputs_are_unchanged(tmp_path):
    with open(os.path.join(HERE, "golden.json"), encoding="utf-8") as fh:
        recorded = json.load(fh)
    now = all_cases(str(tmp_path))
    missing = sorted(set(recorded) - set(now))
    extra = sorted(set(now) - set(recorded))
    changed = {k: why for k in sorted(set(now) & set(recorded))
               if (why := matches(recorded[k], now[k]))}
    assert not (missing or extra or changed), (
        f"golden outputs differ: changed {changed}, missing {missing}, new {extra}; if this "
        f"change alters outputs on purpose, re-record with python tests/golden/record.py")


def test_the_comparison_tells_noise_from_change():
    """The tolerances of ``cases.matches`` pass last-bit noise and fail a small real change
    (the reasoning is in its docstring; here it is checked on arrays of a frame's size)."""
    import numpy as np

    from cases import fingerprint

    rng = np.random.default_rng(7)
    img = rng.uniform(0.0, 1.0, size=(64, 128, 3)).astype(np.float32)
    img[0, :5] = np.nan
    rec = fingerprint(img)
    ulp = img.copy()
    ulp[10, 10, 0] = np.nextafter(ulp[10, 10, 0], np.float32(2.0))  # one last-bit flip
    assert matches(rec, fingerprint(ulp)) == ""
    moved = img.copy()
    moved[10, 10, 0] += np.float32(1e-4)  # below one 8-bit step (3.9e-3)
    assert "projections differ" in matches(rec, fingerprint(moved))
    hole = img.copy()
    hole[5, 5, 1] = np.nan
    assert matches(rec, fingerprint(hole)) == "mask differs"

    table = rng.normal(size=25)
    table[1::2] = 1e-17  # zero by symmetry, noise in practice
    rec = fingerprint(table)
    noisy = table * (1 + 4e-16 * rng.standard_normal(25))
    noisy[1::2] = -3e-17
    assert matches(rec, fingerprint(noisy)) == ""
    changed = table.copy()
    changed[4] *= 1 + 1e-8
    assert "values differ" in matches(rec, fingerprint(changed))

    text = '{"a": "0.1234567890123", "b": "3.0"}'
    assert matches(fingerprint(text), fingerprint('{"a": "0.1234567890124", "b": "3.0"}')) == ""
    assert matches(fingerprint(text), fingerprint('{"a": "0.1234567891", "b": "3.0"}')) != ""
    assert matches(fingerprint(text), fingerprint('{"c": "0.1234567890123", "b": "3.0"}')) != ""
