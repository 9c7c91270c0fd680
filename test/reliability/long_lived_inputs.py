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

"""The robot's long-lived side in a process of its own.

Perception and the behaviour layer stay up while the decision node is killed and started again.

Used by test/reliability/test_respawn.py (every restart must answer) and bench/bench_respawn.py
(how long a restart takes to answer).  One rclpy context for the whole life of the process, as a
real perception or behaviour process has: its publishers are never re-created between node runs.

  python long_lived_inputs.py --namespace /ns [--people 4]

- `people` (sensor-data QoS) at 10 Hz, the same people every time;
- on a `probe TAG` line on stdin: open a help need `TAG-1`, `TAG-2`, ... on `task_status` every
  0.1 s until the node publishes a decision for one of them with every person in view among its
  candidates; then print one JSON line `{"probe": TAG, "decided_wall_s": ..., "request_id": ...,
  "action": ..., "needs_sent": n}`, answer an ask with `helped` on `outcome`, and resolve every
  need of the probe (a need published before the node's subscription matched is simply lost:
  the topic is volatile, as a behaviour layer's is);
- every /diagnostics status of the node: one JSON line `{"diag": {key: value}, "wall_s": ...}`;
- each time a subscription on `people` or `task_status` is matched or dropped (a dead node's
  readers go when their lease ends): `{"matched"|"unmatched": topic, "count": n, "wall_s": ...}`;
- `quit` (or end of stdin): a clean exit.
Prints `{"ready": wall_s}` once its endpoints exist.  Times are wall-clock (time.time()), the
clock the node's log lines and the shared-memory file times use too.  `LongLivedProcess` is
the other end: it starts this script and reads its lines (the test and the benchmark use it).
"""
from __future__ import annotations

import argparse
import json
import os
import queue
import subprocess
import sys
import threading
import time
from typing import Optional

from helpaware_node import wire
from helpaware_node.ros import shm_files
import rclpy
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)
PEOPLE_PERIOD_S = 0.1
PROBE_PERIOD_S = 0.1
NODE_STATUS_NAME = "helpaware_decider: decision"


def say(doc: dict) -> None:
    print(json.dumps(doc), flush=True)


class LongLivedInputs:

    def __init__(self, namespace: str, people: int) -> None:
        self.node = rclpy.create_node("long_lived_inputs", namespace=namespace)
        self.view = [{"id": f"ward-staff-{i:02d}", "distance_m": 1.5 + 0.5 * i,
                      "busyness": round(0.1 + 0.1 * (i % 4), 2)} for i in range(people)]
        self.people_pub = self.node.create_publisher(String, "people", qos_profile_sensor_data,
                                                     event_callbacks=self._matched("people"))
        self.task_pub = self.node.create_publisher(String, "task_status", RELIABLE,
                                                   event_callbacks=self._matched("task_status"))
        self.outcome_pub = self.node.create_publisher(String, "outcome", RELIABLE)
        self.node.create_subscription(String, "decision", self._on_decision, RELIABLE)
        from diagnostic_msgs.msg import DiagnosticArray
        self.node.create_subscription(DiagnosticArray, "/diagnostics", self._on_diagnostics, 10)
        self.node.create_timer(PEOPLE_PERIOD_S, self._show_people)
        self.node.create_timer(PROBE_PERIOD_S, self._probe_step)
        self.probe_tag = ""
        self.probe_sent: list[str] = []

    @staticmethod
    def _matched(topic: str):
        """Return a line each time a node's subscription is matched or dropped (lease ended)."""
        from rclpy.event_handler import PublisherEventCallbacks

        def said(info) -> None:
            if info.current_count_change:
                say({"matched" if info.current_count_change > 0 else "unmatched": topic,
                     "count": info.current_count, "wall_s": time.time()})
        return PublisherEventCallbacks(matched=said)

    def _show_people(self) -> None:
        self.people_pub.publish(String(data=wire.people_document(self.view, time.time())))

    def start_probe(self, tag: str) -> None:
        self.probe_tag, self.probe_sent = tag, []

    def _probe_step(self) -> None:
        if not self.probe_tag:
            return
        rid = f"{self.probe_tag}-{len(self.probe_sent) + 1}"
        self.probe_sent.append(rid)
        self.task_pub.publish(String(data=wire.task_status_document(rid, "open", "door",
                                                                    urgency=1.0)))

    def _on_decision(self, msg: String) -> None:
        now = time.time()
        doc = json.loads(msg.data)
        rid = doc.get("request_id", "")
        if not self.probe_tag or rid not in self.probe_sent:
            return
        if {c["person_id"] for c in doc["candidates"]} != {p["id"] for p in self.view}:
            return        # heard the need before the people: not yet an informed answer
        tag, sent = self.probe_tag, self.probe_sent
        self.probe_tag, self.probe_sent = "", []
        say({"probe": tag, "decided_wall_s": now, "request_id": rid,
             "action": doc["action"], "needs_sent": len(sent)})
        if doc["action"] == "ask":
            self.outcome_pub.publish(String(data=wire.outcome_document(
                rid, doc["person_id"], "helped")))
        for other in sent:
            self.task_pub.publish(String(data=wire.task_status_document(other, "resolved")))

    def _on_diagnostics(self, msg) -> None:
        for st in msg.status:
            if st.name == NODE_STATUS_NAME:
                values = {kv.key: kv.value for kv in st.values}
                values["_level"] = int.from_bytes(st.level, "little") if isinstance(
                    st.level, bytes) else int(st.level)
                values["_message"] = st.message
                say({"diag": values, "wall_s": time.time()})


class LongLivedProcess:
    """This script as a child process, read line by line in a thread."""

    def __init__(self, namespace: str, env: Optional[dict] = None,
                 start_timeout_s: float = 60.0) -> None:
        self.proc = subprocess.Popen([sys.executable, os.path.abspath(__file__),
                                      "--namespace", namespace], stdin=subprocess.PIPE,
                                     stdout=subprocess.PIPE, stderr=subprocess.DEVNULL,
                                     text=True, bufsize=1, env=env)
        self.probes: "queue.Queue[dict]" = queue.Queue()
        self.diags: list[dict] = []
        self.matches: list[dict] = []
        self.exit_sweep: dict = {}
        self._ready = threading.Event()
        threading.Thread(target=self._read, daemon=True).start()
        if not self._ready.wait(start_timeout_s):
            self.stop()
            raise RuntimeError(f"long-lived inputs did not start within {start_timeout_s:.0f} s")

    def _read(self) -> None:
        for line in self.proc.stdout:
            doc = json.loads(line)
            if "ready" in doc:
                self._ready.set()
            elif "probe" in doc:
                self.probes.put(doc)
            elif "diag" in doc:
                self.diags.append(doc)
            elif "shm_exit" in doc:
                self.exit_sweep = doc["shm_exit"]    # what its own clean exit removed
            else:
                self.matches.append(doc)

    def probe(self, tag: str) -> None:
        """Start opening needs TAG-1, TAG-2, ... (the answer comes through `wait_probe`)."""
        self.proc.stdin.write(f"probe {tag}\n")
        self.proc.stdin.flush()

    def wait_probe(self, tag: str, timeout_s: float) -> Optional[dict]:
        end = time.monotonic() + timeout_s
        while time.monotonic() < end:
            try:
                doc = self.probes.get(timeout=max(0.01, end - time.monotonic()))
            except queue.Empty:
                break
            if doc["probe"] == tag:
                return doc
        return None

    def diag_after(self, wall_s: float, timeout_s: float) -> dict:
        """Return the values of the first /diagnostics status after `wall_s` ({} if none)."""
        end = time.monotonic() + timeout_s
        while time.monotonic() < end:
            late = [d for d in list(self.diags) if d["wall_s"] > wall_s]
            if late:
                return late[0]["diag"]
            time.sleep(0.05)
        return {}

    def stop(self) -> None:
        try:
            self.proc.stdin.write("quit\n")
            self.proc.stdin.flush()
            self.proc.wait(timeout=20)
        except Exception:  # noqa: BLE001 - a stuck or gone process is killed instead
            self.proc.kill()
            self.proc.wait()


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--namespace", default="/respawn")
    ap.add_argument("--people", type=int, default=4)
    args = ap.parse_args()
    rclpy.init()
    inputs = LongLivedInputs(args.namespace, args.people)
    # its own shared-memory files, removed at exit: a port that a killed node had written to
    # outlives a clean exit (the dead writer's reference is never dropped)
    records = shm_files.records_dir().with_name("shm_owners_long_lived")
    shm_files.record_own_files(records)
    commands: "queue.Queue[str]" = queue.Queue()

    def read_stdin() -> None:
        for line in sys.stdin:
            commands.put(line.strip())
        commands.put("quit")
    threading.Thread(target=read_stdin, daemon=True).start()
    say({"ready": time.time()})
    try:
        while True:
            try:
                cmd = commands.get_nowait()
            except queue.Empty:
                rclpy.spin_once(inputs.node, timeout_sec=0.02)
                continue
            if cmd == "quit":
                break
            if cmd.startswith("probe "):
                inputs.start_probe(cmd.split(None, 1)[1])
    except KeyboardInterrupt:
        pass
    finally:
        shm_files.record_own_files(records, keep_recorded=True)   # ports opened again since
        inputs.node.destroy_node()
        rclpy.try_shutdown()
        done = shm_files.remove_own_files(records)
        say({"shm_exit": {"removed": done.removed, "in_use": done.in_use,
                          "replaced": done.replaced, "records_done": done.records_done}})
    return 0


if __name__ == "__main__":
    sys.exit(main())
