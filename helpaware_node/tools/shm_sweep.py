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

"""`helpaware shm-sweep`: remove the Fast DDS shared-memory files that killed decision nodes left.

Each node process records the shared-memory sets it holds (helpaware_node/ros/shm_files.py);
this command removes the sets of recorded processes that are gone, only where the file is still
the recorded one and no live process holds its lock.  A node does the same at each start, so
the command is for a node that is not coming back (or to see what is there: --dry-run).
"""
from __future__ import annotations

import argparse
from pathlib import Path

from ..ros import shm_files


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--records", default="", metavar="DIR",
                        help=f"record folder (default {shm_files.records_dir()}: the "
                        f"ROS_HOME of the user that runs the node)")
    parser.add_argument("--dry-run", action="store_true",
                        help="list the records and what would be removed, remove nothing")


def _mb(n: int) -> str:
    return f"{n / 1e6:.2f} MB"


def run(args) -> int:
    directory = Path(args.records) if args.records else shm_files.records_dir()
    records, bad = shm_files.read_records(directory)
    print(f"records: {directory} ({len(records)})")
    for rec in records:
        size = sum(int(m.get("size", 0)) for s in rec.sets.values() for m in s.values())
        state = "running" if rec.alive else "gone"
        print(f"  pid {rec.pid} ({state}): {len(rec.sets)} set(s), {_mb(size)} recorded")
    for reason in bad:
        print(f"  not a record, left alone: {reason}")
    claim = shm_files.claim_dead_instances(directory)
    if args.dry_run:
        paths = sorted(str(c.shm_dir / n) for c in claim.sets for n in c.members)
        claim.release()
        print(f"would remove up to {len(paths)} file(s) of dead instances: "
              f"{', '.join(paths) or 'none'}")
        if claim.outcome.in_use:
            print(f"in use by a live process (left alone): {', '.join(claim.outcome.in_use)}")
        return 0
    outcome = claim.remove()
    for path in outcome.removed:
        print(f"  removed {path}")
    for name in outcome.replaced:
        print(f"  left alone (another process's file now): {name}")
    print(outcome.summary())
    return 0
