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

"""Durability under faults: a writer killed with SIGKILL loses no acknowledged outcome."""
import os
import random
import signal
import subprocess
import sys
import time

from helpaware_node.store import SqliteStore

KEY = b"d" * 32
TRIALS = 20
PARALLEL = 5

WRITER = r"""
import sys
from helpaware_node.core import Result
from helpaware_node.store import SqliteStore, StoredEvent
store = SqliteStore(sys.argv[1], "r1", b"d" * 32)
keys = [store.key_for(f"nurse-{i}") for i in range(7)]
print("ready", flush=True)
i = 0
while True:
    e = StoredEvent(store.next_event_id(), keys[i % 7], float(i), list(Result)[i % 4], 0.3, 0.1)
    store.append(e)
    print("ack", e.event_id, flush=True)
    i += 1
"""


def start_writer(path):
    return subprocess.Popen([sys.executable, "-c", WRITER, str(path)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, bufsize=1)


def acks_until_killed(proc, rng):
    """Read acks, SIGKILL after a random number of them (and a random extra delay)."""
    assert proc.stdout.readline().strip() == "ready", proc.stderr.read()
    acked = []
    stop_after = rng.randint(1, 60)
    while len(acked) < stop_after:
        line = proc.stdout.readline()
        assert line.startswith("ack "), proc.stderr.read()
        acked.append(line.split()[1])
    time.sleep(rng.uniform(0.0, 0.01))
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait()
    # acks printed in full before the kill landed count too; the kill can cut the last line
    # short (seen in CI: "ack " with no id), and an id we cannot read cannot be checked
    rest = proc.stdout.read()
    complete = rest.split("\n")[:-1]          # the part after the last newline is cut short
    acked += [fields[1] for fields in (line.split() for line in complete)
              if len(fields) == 2 and fields[0] == "ack"]
    return acked


def test_every_acknowledged_outcome_survives_sigkill(tmp_path):
    rng = random.Random(20261201)
    results = []
    for batch in range(TRIALS // PARALLEL):
        paths = [tmp_path / f"t{batch}_{j}.sqlite3" for j in range(PARALLEL)]
        procs = [start_writer(p) for p in paths]
        for p, proc in zip(paths, procs):
            results.append((p, acks_until_killed(proc, rng)))
    assert len(results) >= 20
    for path, acked in results:
        store = SqliteStore(path, "r1", KEY)
        assert store.health.level == "OK", store.health.message
        stored = {e.event_id for k in store.keys() for e in store.events_for(k)}
        assert set(acked) <= stored, f"{path}: lost {sorted(set(acked) - stored)[:5]}"
        # the snapshot is still the fold of what is stored (same transaction)
        for k in store.keys():
            from helpaware_node.core import fold_events
            assert store.belief(k) == fold_events([e.to_outcome() for e in store.events_for(k)],
                                                  store.model)
        store.close()
