"""Re-record the golden outputs (run from the repository root: python tests/golden/record.py).

Only for a change that alters outputs on purpose; say why in the same commit."""

import json
import os
import sys
import tempfile

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))))
os.environ.setdefault("MAGRETINA_CACHE", tempfile.mkdtemp(prefix="magretina-golden-cache-"))

from cases import all_cases  # noqa: E402

with tempfile.TemporaryDirectory() as tmp:
    records = all_cases(tmp)
path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "golden.json")
tmp_path = path + ".tmp"
with open(tmp_path, "w", encoding="utf-8") as fh:
    json.dump(records, fh, indent=0, sort_keys=True)
    fh.write("\n")
os.replace(tmp_path, path)
print(f"recorded {len(records)} outputs in {path}")
