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

"""Benchmark: help need -> decision latency across processes, beside a bare relay (the floor).

Prints, side by side in one run:
- with 20 people in view: median and 99th percentile of the round trip (publish a task_status
  `open`, receive its decision) for the node and for a relay node that republishes a String,
  and their ratios (targets: median <= 1.2, p99 <= 2.0);
- with 200 people in view: the node's median (target <= 3 ms) beside the relay's;
- the time to write one 200-candidate decision document, standard library against orjson;
- the node's CPU seconds per second with 100 people at 30 Hz.
Needs are interleaved between node and relay, so both see the same machine load.
Run: .venv/bin/python bench/bench_node.py [--needs 300]  (loopback, own domain id)
"""
from __future__ import annotations

import argparse
import os
import random
import signal
import statistics
import subprocess
import sys
import time

os.environ.setdefault("ROS_AUTOMATIC_DISCOVERY_RANGE", "LOCALHOST")
os.environ.pop("ROS_LOCALHOST_ONLY", None)
os.environ["ROS_DOMAIN_ID"] = os.environ.get("ROS_DOMAIN_ID") or str(random.randint(101, 200))

RELAY_CODE = """
import rclpy
from rclpy.executors import ExternalShutdownException
from rclpy.qos import QoSProfile, ReliabilityPolicy
from std_msgs.msg import String
q = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)
rclpy.init()
n = rclpy.create_node('relay', namespace='/relay')
pub = n.create_publisher(String, 'decision', q)
n.create_subscription(String, 'task_status', lambda m: pub.publish(String(data=m.data)), q)
try:
    rclpy.spin(n)
except (KeyboardInterrupt, ExternalShutdownException):
    pass
rclpy.try_shutdown()
"""


def cpu_s(pid: int) -> float:
    with open(f"/proc/{pid}/stat") as fh:
        fields = fh.read().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def percentile(xs, q):
    xs = sorted(xs)
    return xs[min(len(xs) - 1, int(round(q * (len(xs) - 1))))]


def print_encoder_costs() -> None:
    """Print the cost of writing one 200-candidate decision by json and by orjson.

    One 200-candidate decision document written by json and by orjson (in this process: the codec's
    own cost, apart from the middleware).
    """
    from helpaware_node import wire
    from helpaware_node.core import DecisionConfig, SiteModel
    from helpaware_node.core.belief import Belief
    from helpaware_node.core.policy import Candidate, decide, HelpNeed
    rng = random.Random(2)
    model, config = SiteModel(), DecisionConfig()
    cands = [Candidate(f"q{i}", rng.uniform(1, 7), 1000.0, Belief(2.0, 2.0),
                       busyness=rng.random(), activity="charting") for i in range(200)]
    decision = decide(HelpNeed("enc", "door", 1000.0), cands, 1000.0, (), model, config)
    doc = wire.decision_to_document(decision, (), None, None, "r1", check=False)
    costs = {}
    for name, finite in (("json", False), ("orjson", True)):
        if finite and wire.orjson is None:
            continue
        reps, t0 = 200, time.perf_counter()
        for _ in range(reps):
            wire.fast_text(doc, model, config, finite=finite)
        costs[name] = (time.perf_counter() - t0) / reps * 1e3
    print("writing one 200-candidate decision document: "
          + ", ".join(f"{k} {v:.3f} ms" for k, v in costs.items())
          + ("" if "orjson" in costs else " (orjson not installed)"))


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--needs", type=int, default=300)
    ap.add_argument("--cpu-seconds", type=float, default=10.0)
    args = ap.parse_args()

    from helpaware_node import wire
    from helpaware_node.ros import launch_config
    import rclpy
    from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
    from std_msgs.msg import String

    q = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)
    node_proc = launch_config.start(namespace="/bench", stderr=subprocess.DEVNULL,
                                    overrides={"max_asks_per_hour": 0,   # decide, never ask
                                               "store_path": "memory"})
    relay_proc = subprocess.Popen([sys.executable, "-c", RELAY_CODE])
    rclpy.init()
    me = rclpy.create_node("bench_driver")
    got = {}

    def on_decision(msg, tag):
        # the clock is read first and both answers are read alike (the relay's echo and the
        # decision both write "request_id" compactly): decoding only the relay's answer
        # before reading the clock added the decoder's time to the relay's figures alone
        t = time.perf_counter()
        got[msg.data.split('"request_id":"', 1)[1].split('"', 1)[0]] = t

    targets = {}
    for tag, ns in (("node", "/bench"), ("relay", "/relay")):
        targets[tag] = me.create_publisher(String, f"{ns}/task_status", q)
        me.create_subscription(String, f"{ns}/decision", lambda m, t=tag: on_decision(m, t), q)
    people_pub = me.create_publisher(String, "/bench/people", qos_profile_sensor_data)

    def spin_until(pred, timeout_s):
        end = time.monotonic() + timeout_s
        while time.monotonic() < end and not pred():
            rclpy.spin_once(me, timeout_sec=0.005)
        return pred()

    try:
        ok = spin_until(lambda: all(p.get_subscription_count() for p in targets.values())
                        and me.count_publishers("/bench/decision")
                        and me.count_publishers("/relay/decision"), 60)
        if not ok:
            print("bench: processes did not connect")
            return 1
        rng = random.Random(1)

        def view(n, prefix):
            return [{"id": f"{prefix}{i}", "distance_m": round(rng.uniform(1, 7), 1),
                     "busyness": round(rng.random(), 2), "activity": "charting"}
                    for i in range(n)]

        def round_trips(people, needs, tag_prefix):
            lat = {"node": [], "relay": []}
            last_people = 0.0
            for k in range(needs):
                for tag in ("node", "relay"):    # interleaved: both see the same machine load
                    if time.monotonic() - last_people > 0.1:
                        people_pub.publish(String(data=wire.people_document(people,
                                                                            time.time())))
                        last_people = time.monotonic()
                        spin_until(lambda: False, 0.002)
                    rid = f"{tag_prefix}{tag}-{k}"
                    text = wire.task_status_document(rid, "open", "door")
                    t0 = time.perf_counter()
                    targets[tag].publish(String(data=text))
                    if spin_until(lambda: rid in got, 5.0):
                        lat[tag].append(got[rid] - t0)
                    if tag == "node":
                        targets[tag].publish(String(data=wire.task_status_document(rid,
                                                                                   "resolved")))
            return lat

        def row(tag, xs):
            print(f"{tag:8}  {statistics.median(xs) * 1e3:9.3f}  "
                  f"{percentile(xs, 0.99) * 1e3:7.3f}  {len(xs):8d}")

        lat = round_trips(view(20, "p"), args.needs, "a")
        print("help need -> decision across processes, 20 people in view, "
              f"{args.needs} needs each")
        print(f"{'':8}  {'median ms':>9}  {'p99 ms':>7}  {'received':>8}")
        for tag in ("node", "relay"):
            row(tag, lat[tag])
        ratio = statistics.median(lat["node"]) / statistics.median(lat["relay"])
        ratio99 = percentile(lat["node"], 0.99) / percentile(lat["relay"], 0.99)
        print(f"ratio node/relay, median: {ratio:.2f}  (target <= 1.2: "
              f"{'met' if ratio <= 1.2 else 'missed'})")
        print(f"ratio node/relay, p99:    {ratio99:.2f}  (target <= 2.0: "
              f"{'met' if ratio99 <= 2.0 else 'missed'})")

        # the 200 include the 20 above (same ids), so each decision has 200 candidates
        lat200 = round_trips(view(200, "p"), max(args.needs // 3, 30), "b")
        print(f"with 200 people in view, {len(lat200['node'])} needs each")
        for tag in ("node", "relay"):
            row(tag, lat200[tag])
        med200 = statistics.median(lat200["node"]) * 1e3
        print(f"node median with 200 in view: {med200:.3f} ms  (target <= 3 ms: "
              f"{'met' if med200 <= 3.0 else 'missed'})")
        print_encoder_costs()

        view100 = [{"id": f"q{i}", "distance_m": round(rng.uniform(1, 7), 1),
                    "busyness": round(rng.random(), 2), "activity": "walking_fast"}
                   for i in range(100)]
        c0, t0 = cpu_s(node_proc.pid), time.monotonic()
        next_t = t0
        sent = 0
        while time.monotonic() - t0 < args.cpu_seconds:
            people_pub.publish(String(data=wire.people_document(view100, time.time())))
            sent += 1
            next_t += 1.0 / 30.0
            spin_until(lambda: False, max(0.0, next_t - time.monotonic()))
        elapsed = time.monotonic() - t0
        c1 = cpu_s(node_proc.pid)
        print(f"node CPU with 100 people at 30 Hz: {(c1 - c0) / elapsed:.3f} CPU-s per s "
              f"({sent / elapsed:.1f} documents/s sent, {elapsed:.1f} s)")
        return 0
    finally:
        for p in (node_proc, relay_proc):
            p.send_signal(signal.SIGINT)
        for p in (node_proc, relay_proc):
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()
        me.destroy_node()
        rclpy.try_shutdown()


if __name__ == "__main__":
    sys.exit(main())
