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

"""Drives a running decision node at a given input load and prints one JSON line of results.

Used by test_load.py (10x load, asserts) and bench/bench_load.py (1x beside 10x, figures).
A load level is `people x Hz` on `people` (best effort) plus one help need every
`need_interval_s` on `task_status`; every ask the node makes is answered on `outcome` at once
(seeded helped / declined / no_response), and a need is resolved when the node continues or
someone helped, so the behaviour layer is the well-behaved one the node expects.

Usage: python load_driver.py --namespace /load --node-pid PID --phases 10x:10 [--seed 1]
Phases are `<level>:<seconds>` separated by commas; levels are in LEVELS.  Every wait is
bounded by a deadline.  The node's RSS (VmRSS) and CPU seconds are sampled once a second.
"""
from __future__ import annotations

import argparse
from dataclasses import dataclass, field
import json
import os
import random
import sys
import time

# name -> (people in view, people messages per second, seconds between help needs)
NOMINAL = (10, 30.0, 10.0)
LEVELS = {"1x": NOMINAL, "10x": (100, 30.0, 1.0)}
RESULT_CYCLE = ("helped", "declined", "no_response")
SETTLE_TIMEOUT_S = 60.0
WARMUP_PEOPLE_MESSAGES = 10


def rss_kib(pid: int) -> int:
    with open(f"/proc/{pid}/status") as fh:
        for line in fh:
            if line.startswith("VmRSS:"):
                return int(line.split()[1])
    raise RuntimeError(f"no VmRSS for pid {pid}")


def cpu_s(pid: int) -> float:
    with open(f"/proc/{pid}/stat") as fh:
        fields = fh.read().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def percentiles_ms(xs: list[float]) -> dict:
    """Nearest-rank p50/p95/p99/max in milliseconds (None when there is no sample)."""
    if not xs:
        return {"n": 0, "p50": None, "p95": None, "p99": None, "max": None}
    s = sorted(xs)

    def rank(q):
        return s[min(len(s) - 1, max(0, int(-(-q * len(s) // 1)) - 1))]
    return {"n": len(s), "p50": rank(0.50) * 1e3, "p95": rank(0.95) * 1e3,
            "p99": rank(0.99) * 1e3, "max": s[-1] * 1e3}


@dataclass
class Phase:
    level: str
    duration_s: float
    people_sent: int = 0
    needs_sent: int = 0
    first_latency_s: list = field(default_factory=list)    # open need -> its first decision
    redecide_latency_s: list = field(default_factory=list)  # outcome -> next decision
    elapsed_s: float = 0.0
    cpu_s: float = 0.0
    people_received_at_start: int = 0   # node's count before the phase (/diagnostics)
    people_received: int = 0            # people messages of this phase the node received


def main(argv=None) -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--namespace", default="/load")
    ap.add_argument("--node-pid", type=int, required=True)
    ap.add_argument("--phases", default="10x:10")
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    phases = [Phase(lv, float(sec)) for lv, sec in (p.split(":") for p in args.phases.split(","))]
    for ph in phases:
        if ph.level not in LEVELS:
            raise SystemExit(f"--phases: unknown level {ph.level!r} (allowed: {sorted(LEVELS)})")

    from diagnostic_msgs.msg import DiagnosticArray
    from helpaware_node import wire
    import rclpy
    from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
    from std_msgs.msg import String

    reliable = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)
    rclpy.init()
    node = rclpy.create_node("load_driver", namespace=args.namespace)
    people_pub = node.create_publisher(String, "people", qos_profile_sensor_data)
    task_pub = node.create_publisher(String, "task_status", reliable)
    outcome_pub = node.create_publisher(String, "outcome", reliable)
    rng = random.Random(args.seed)
    staff = [{"id": f"staff-{i:03d}", "distance_m": round(rng.uniform(1.0, 7.0), 1),
              "busyness": round(rng.uniform(0.0, 0.6), 2), "activity": "walking"}
             for i in range(max(v[0] for v in LEVELS.values()))]

    state = {"phase": None}
    open_at: dict[str, float] = {}        # request id -> perf_counter when opened
    outcome_at: dict[str, float] = {}     # request id -> perf_counter of its latest outcome
    decisions: dict[str, list] = {}       # request id -> [(action, person_id), ...]
    asks: list[tuple[str, str]] = []      # (request id, person id) of every ask
    outcomes: list[dict] = []             # every outcome sent
    tasks_sent = [0]
    resolved: set[str] = set()
    diag = {"last": None, "ticks": 0}
    result_i = [0]
    decision_bytes: list[int] = []

    def publish_task(text: str) -> None:
        task_pub.publish(String(data=text))
        tasks_sent[0] += 1

    def on_decision(msg: String) -> None:
        t = time.perf_counter()
        decision_bytes.append(len(msg.data))
        d = json.loads(msg.data)
        rid = d["request_id"]
        if rid not in open_at:
            return
        ph = state["phase"]
        seen = decisions.setdefault(rid, [])
        if not seen:
            if ph is not None:
                ph.first_latency_s.append(t - open_at[rid])
        elif rid in outcome_at and ph is not None:
            ph.redecide_latency_s.append(t - outcome_at.pop(rid))
        seen.append((d["action"], d["person_id"]))
        if d["action"] == "ask":
            result = RESULT_CYCLE[result_i[0] % len(RESULT_CYCLE)]
            result_i[0] += 1
            asks.append((rid, d["person_id"]))
            outcomes.append({"request_id": rid, "person_id": d["person_id"], "result": result})
            outcome_at[rid] = time.perf_counter()
            outcome_pub.publish(String(data=wire.outcome_document(rid, d["person_id"], result)))
            if result == "helped":
                publish_task(wire.task_status_document(rid, "resolved"))
                resolved.add(rid)
        else:   # the node continues on its own: the behaviour layer closes the need
            publish_task(wire.task_status_document(rid, "resolved"))
            resolved.add(rid)

    def on_diag(msg) -> None:
        for st in msg.status:
            if st.name.endswith(": decision"):
                diag["last"] = {kv.key: kv.value for kv in st.values}
                diag["ticks"] += 1

    decision_sub = node.create_subscription(String, "decision", on_decision, reliable)
    node.create_subscription(DiagnosticArray, "/diagnostics", on_diag, 10)

    def spin_until(pred, timeout_s: float) -> bool:
        end = time.monotonic() + timeout_s
        while not pred():
            left = end - time.monotonic()
            if left <= 0:
                return pred()
            rclpy.spin_once(node, timeout_sec=min(left, 0.002))
        return True

    def node_count(key: str) -> int:
        return int((diag["last"] or {}).get(key, 0))

    out: dict = {"levels": {k: {"people": v[0], "people_hz": v[1], "need_interval_s": v[2]}
                            for k, v in LEVELS.items()}}
    rss: list[tuple[float, int]] = []     # (seconds since load start, KiB)
    try:
        connected = spin_until(lambda: people_pub.get_subscription_count() > 0
                               and task_pub.get_subscription_count() > 0
                               and outcome_pub.get_subscription_count() > 0
                               and decision_sub.get_publisher_count() > 0
                               and diag["last"] is not None, 60.0)
        out["connected"] = connected
        if not connected:
            print(json.dumps(out), flush=True)
            return 1
        # people in view before the first need (a best-effort topic: several copies)
        warm = [dict(p) for p in staff[:LEVELS[phases[0].level][0]]]
        for _ in range(WARMUP_PEOPLE_MESSAGES):
            people_pub.publish(String(data=wire.people_document(warm, time.time())))
            spin_until(lambda: False, 0.05)

        def fresh_people_count() -> int:
            # two more /diagnostics ticks (about 2 s with nothing sent on people): the count
            # then holds every people message sent so far that the node will ever get
            ticks0 = diag["ticks"]
            spin_until(lambda: diag["ticks"] >= ticks0 + 2, 10.0)
            return node_count("people.received")

        load_t0 = time.monotonic()
        next_rss = load_t0
        rss.append((0.0, rss_kib(args.node_pid)))
        rid_n = 0
        for ph in phases:
            n_people, hz, need_every_s = LEVELS[ph.level]
            view = [dict(p) for p in staff[:n_people]]
            state["phase"] = ph
            spin_until(lambda: False, 0.0)
            ph.people_received_at_start = fresh_people_count()
            c0, t0 = cpu_s(args.node_pid), time.monotonic()
            next_people, next_need = t0, t0
            while True:
                now = time.monotonic()
                if now - t0 >= ph.duration_s:
                    break
                if now >= next_people:
                    people_pub.publish(String(data=wire.people_document(view, time.time())))
                    ph.people_sent += 1
                    next_people += 1.0 / hz
                    if next_people < now - 1.0:   # fell a second behind: do not burst
                        next_people = now
                if now >= next_need:
                    rid = f"load-{rid_n:05d}"
                    rid_n += 1
                    open_at[rid] = time.perf_counter()
                    publish_task(wire.task_status_document(rid, "open", "door", 0.5))
                    ph.needs_sent += 1
                    next_need += need_every_s
                if now >= next_rss:
                    rss.append((now - load_t0, rss_kib(args.node_pid)))
                    next_rss += 1.0
                    if next_rss < now:
                        next_rss = now + 1.0
                rclpy.spin_once(node, timeout_sec=max(0.0, min(next_people, next_need,
                                                               next_rss) - time.monotonic()))
            ph.elapsed_s = time.monotonic() - t0
            ph.cpu_s = cpu_s(args.node_pid) - c0
        load_elapsed = time.monotonic() - load_t0
        rss.append((load_elapsed, rss_kib(args.node_pid)))
        state["phase"] = phases[-1]   # late decisions still count for the last phase
        # settle: every need decided and closed, and the node's counts caught up with ours
        spin_until(lambda: all(rid in resolved for rid in open_at), SETTLE_TIMEOUT_S)
        spin_until(lambda: node_count("outcome.received") >= len(outcomes)
                   and node_count("task_status.received") >= tasks_sent[0], SETTLE_TIMEOUT_S)
        received_end = fresh_people_count()
        last = diag["last"]
        for i, ph in enumerate(phases):
            end = (phases[i + 1].people_received_at_start if i + 1 < len(phases)
                   else received_end)
            ph.people_received = end - ph.people_received_at_start
        out.update({
            "load_elapsed_s": load_elapsed,
            "rss_kib": rss,
            "needs": len(open_at),
            "needs_decided": sum(1 for rid in open_at if decisions.get(rid)),
            "needs_resolved": len(resolved),
            "decisions": sum(len(v) for v in decisions.values()),
            "decision_bytes_mean": (sum(decision_bytes) / len(decision_bytes)
                                    if decision_bytes else 0),
            "people_warmup_sent": WARMUP_PEOPLE_MESSAGES,
            "asks": len(asks),
            "outcomes_sent": outcomes,
            "task_status_sent": tasks_sent[0],
            "node_diagnostics": last,
            "phases": [{
                "level": ph.level, "duration_s": ph.elapsed_s, "people_sent": ph.people_sent,
                "people_received": ph.people_received, "needs_sent": ph.needs_sent,
                "people_rate_hz": ph.people_sent / ph.elapsed_s,
                "need_rate_hz": ph.needs_sent / ph.elapsed_s, "node_cpu_s": ph.cpu_s,
                "first_decision_ms": percentiles_ms(ph.first_latency_s),
                "redecision_ms": percentiles_ms(ph.redecide_latency_s),
                "first_decision_s": ph.first_latency_s,
                "redecision_s": ph.redecide_latency_s,
            } for ph in phases],
        })
        print(json.dumps(out), flush=True)
        return 0
    finally:
        node.destroy_node()
        rclpy.try_shutdown()


if __name__ == "__main__":
    sys.exit(main())
