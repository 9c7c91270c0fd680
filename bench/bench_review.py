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

"""Review of a large bag beside a bare rosbags read + deserialise of the same bag (the floor).

The bag is an invented night shift written through the core (real decision documents) and
padded with people messages, as a node publishing perception at a high rate would produce.
Each side runs in its own child process so peak memory (max RSS) is measured separately.
Prints both times, the ratio review / floor (target <= 2) and the peak memory of each.

    python bench/bench_review.py [--messages 1000000] [--needs 2000]
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time


def child_floor(bag: str) -> dict:
    from helpaware_node.bag import typestore
    from rosbags.rosbag2 import Reader
    store = typestore()
    t0 = time.perf_counter()
    n = 0
    with Reader(bag) as reader:
        for conn, _, raw in reader.messages():
            store.deserialize_cdr(raw, conn.msgtype)
            n += 1
    return {"seconds": time.perf_counter() - t0, "messages": n}


def child_review(bag: str, out: str) -> dict:
    t0 = time.perf_counter()
    from helpaware_node.review import report as review
    import matplotlib  # noqa: F401  (counted: the report needs it)
    summary = review.build(bag, out)
    return {"seconds": time.perf_counter() - t0, "messages": sum(summary["messages"].values())}


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--messages", type=int, default=1_000_000, help="messages in the bag")
    ap.add_argument("--needs", type=int, default=2000, help="help needs (decisions) in the bag")
    ap.add_argument("--child", nargs="+", help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.child:
        kind, bag, *rest = args.child
        res = child_floor(bag) if kind == "floor" else child_review(bag, rest[0])
        res["max_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
        print(json.dumps(res))
        return 0

    from helpaware_node.review.sample import write_sample_bag
    with tempfile.TemporaryDirectory(prefix="bench-review-") as tmp:
        bag = os.path.join(tmp, "bag")
        per_need = 6   # about: decision, 2 task_status, outcome, markers, diagnostics, people
        t0 = time.perf_counter()
        extra = max(0, args.messages - per_need * args.needs)
        written = write_sample_bag(bag, needs=args.needs, extra_people_messages=extra)
        write_s = time.perf_counter() - t0
        size_mb = sum(os.path.getsize(os.path.join(bag, f)) for f in os.listdir(bag)) / 1e6
        print(f"bag: {size_mb:.0f} MB, {written.decisions} decisions, {written.people_messages} "
              f"people messages, written in {write_s:.1f} s")
        runs = {}
        for kind in ("floor", "review"):
            cmd = [sys.executable, __file__, "--child", kind, bag, os.path.join(tmp, "out")]
            proc = subprocess.run(cmd, capture_output=True, text=True, check=True)
            runs[kind] = json.loads(proc.stdout.strip().splitlines()[-1])
    f, r = runs["floor"], runs["review"]
    print(f"{'':24}{'seconds':>10}{'messages':>12}{'peak RSS MB':>14}")
    for label, row in (("floor (read+deserialise)", f), ("review (report+summary)", r)):
        print(f"{label:24}{row['seconds']:>10.2f}{row['messages']:>12}{row['max_rss_mb']:>14.0f}")
    ratio = r["seconds"] / f["seconds"]
    print(f"ratio review / floor: {ratio:.2f} (target <= 2: {'met' if ratio <= 2 else 'NOT met'})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
