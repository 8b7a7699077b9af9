"""Byte identity of a fixed set of outputs across refactorings.

The digests in ``hashes.json`` were recorded from the code before a change; every image,
table and metric here must reproduce them exactly.  Source of truth: the project's own
earlier outputs (this is a regression guard, not an external check; the physics is checked
against outside references in the other test folders).  A change that alters outputs on
purpose re-records the digests with ``python tests/golden/record.py`` in the same commit and
says why.  The digests are of this machine kind's floating-point results (x86-64, numba's
LLVM); another CPU family may round differently and would need its own recording.
"""

import json
import os

from cases import all_cases

HERE = os.path.dirname(os.path.abspath(__file__))


def test_outputs_are_byte_identical(tmp_path):
    with open(os.path.join(HERE, "hashes.json"), encoding="utf-8") as fh:
        recorded = json.load(fh)
    now = all_cases(str(tmp_path))
    missing = sorted(set(recorded) - set(now))
    extra = sorted(set(now) - set(recorded))
    changed = sorted(k for k in set(now) & set(recorded) if now[k] != recorded[k])
    assert not (missing or extra or changed), (
        f"golden outputs differ: changed {changed}, missing {missing}, new {extra}; if this "
        f"change alters outputs on purpose, re-record with python tests/golden/record.py")
