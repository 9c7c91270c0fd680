# Copyright 2026 The helpaware_node authors
#
# Licensed under the Apache License, Version 2.0 (the "License");
# you may not use this file except in compliance with the License.
# You may obtain a copy of the License at
#
#     http://www.apache.org/licenses/LICENSE-2.0
#
# Unless required by applicable law or agreed to in writing, software
# distributed under the License is distributed on an "AS IS" BASIS,
# WITHOUT WARRANTIES OR CONDITIONS OF ANY KIND, either express or implied.
# See the License for the specific language governing permissions and
# limitations under the License.

"""What signing costs a fleet document, beside reading it without a signature.

Per outcome document, median over repeats, in one process: encode and sign; decode with the
signature check (fleet_documents.decode_document); and the floor, json.loads plus the same
field checks without any signature (the v1 path of older versions).  Prints the ratio of the
signed decode to the floor, and what a late joiner's catch-up of 6 000 events spends on it.
"""
from __future__ import annotations

import json
import platform
import statistics
import sys
import time

from helpaware_node.core import Result
from helpaware_node.fleet_documents import decode_document, encode_document, KINDS
from helpaware_node.store import person_key, SiteKeys, StoredEvent

SITE_KEY = bytes(range(32))
KEYS = SiteKeys.single(SITE_KEY).key_ring()
N = 2000


def events() -> list[StoredEvent]:
    return [StoredEvent(f"ward{i % 4}/{i}", person_key(SITE_KEY, f"night-staff-{i % 40}"),
                        1_764_632_000.0 + i, list(Result)[i % 3], 0.01 * (i % 90), 0.1, "door")
            for i in range(N)]


def per_doc_us(fn, items, repeats: int = 5) -> float:
    runs = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        for x in items:
            fn(x)
        runs.append((time.perf_counter() - t0) / len(items) * 1e6)
    return statistics.median(runs)


def main() -> int:
    evs = events()
    texts = [encode_document("outcome", e, KEYS) for e in evs]
    unsigned = [json.dumps({k: v for k, v in json.loads(t).items()
                            if k not in ("site", "key_id", "sig")}) for t in texts]
    floor = lambda t: KINDS["outcome"].from_fields(json.loads(t))   # noqa: E731
    sign_us = per_doc_us(lambda e: encode_document("outcome", e, KEYS), evs)
    decode_us = per_doc_us(lambda t: decode_document(t, KEYS), texts)
    floor_us = per_doc_us(floor, unsigned)
    print(f"bench_signing  python {sys.version.split()[0]}  {platform.machine()}  "
          f"{N} outcome documents, median of 5")
    print(f"{'step':<34}{'us per document':>16}")
    print(f"{'encode + sign':<34}{sign_us:>16.1f}")
    print(f"{'decode + signature check':<34}{decode_us:>16.1f}")
    print(f"{'decode without signature (floor)':<34}{floor_us:>16.1f}")
    print(f"ratio signed decode / floor: {decode_us / floor_us:.2f}")
    print(f"catch-up of 6 000 events: {6000 * decode_us / 1e6:.2f} s decoding "
          f"({6000 * (decode_us - floor_us) / 1e6:.2f} s of it the signature)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
