"""Re-record the golden digests (run from the repository root: python tests/golden/record.py).

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
    digests = all_cases(tmp)
path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "hashes.json")
with open(path, "w", encoding="utf-8") as fh:
    json.dump(digests, fh, indent=1, sort_keys=True)
    fh.write("\n")
print(f"recorded {len(digests)} digests in {path}")
