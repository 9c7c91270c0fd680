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

"""Benchmark: the decision node process at 10x the nominal input, beside the nominal load.

One node process (from ros/launch_config.py, SQLite store in a temporary directory) is driven
by test/reliability/load_driver.py (the same driver as test/reliability/test_load.py) through
alternating phases (about 2 s apart, while the node's counts are read), so both loads see
the same machine:
  1x  = 10 people in view at 30 Hz, a help need every 10 s (nominal)
  10x = 100 people at 30 Hz, a help need every second
and every ask is answered on `outcome` at once.  Prints per load: achieved rates, people
documents received by the node, decision latency (open need -> decision, and outcome -> next
decision) p50/p95/p99/max, the node's CPU seconds; then RSS at start, midpoint and end, the
outcomes sent and stored, and the ratio of median decision latency at 10x over 1x.
Run: .venv/bin/python bench/bench_load.py [--rounds 3 --nominal-s 30 --load-s 15]
(loopback, own domain id)
"""
from __future__ import annotations

import argparse
import json
import os
import signal
import sqlite3
import subprocess
import sys
import tempfile

from ros_domain import loopback_own_domain  # noqa: E402  (bench/ is this script's folder)

loopback_own_domain()   # loopback, and a domain id no test run on this machine holds

HERE = os.path.dirname(os.path.abspath(__file__))
DRIVER = os.path.join(HERE, "..", "test", "reliability", "load_driver.py")
# wide limits, so the node keeps asking for the whole run: the caps at 1000, the most the
# parameters allow (core.model.MAX_ASKS_CAP; a larger value is refused at start-up)
OVERRIDES = {"robot_id": "bench-load", "min_reask_interval_s": 5.0,
             "max_asks_per_person_per_day": 1000, "max_asks_per_hour": 1000}


def pct_ms(xs, q):
    """Nearest-rank percentile in milliseconds."""
    s = sorted(xs)
    return s[min(len(s) - 1, max(0, -(-int(q * 1000) * len(s) // 1000) - 1))] * 1e3


def row(name, xs):
    if not xs:
        return f"{name:30}  {'-':>5}"
    return (f"{name:30}  {len(xs):5d}  {pct_ms(xs, 0.5):8.2f}  {pct_ms(xs, 0.95):8.2f}  "
            f"{pct_ms(xs, 0.99):8.2f}  {max(xs) * 1e3:8.2f}")


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rounds", type=int, default=3, help="1x then 10x phases, this many times")
    ap.add_argument("--nominal-s", type=float, default=30.0, help="seconds of each 1x phase")
    ap.add_argument("--load-s", type=float, default=15.0, help="seconds of each 10x phase")
    args = ap.parse_args()
    sys.path.insert(0, os.path.join(HERE, ".."))
    from helpaware_node.ros import launch_config

    phases = ",".join(f"1x:{args.nominal_s:g},10x:{args.load_s:g}" for _ in range(args.rounds))
    with tempfile.TemporaryDirectory(prefix="bench_load_") as tmp:
        env = dict(os.environ, ROS_HOME=os.path.join(tmp, "ros_home"))
        store_file = os.path.join(tmp, "beliefs.sqlite3")
        node_log = open(os.path.join(tmp, "node.log"), "w+")
        node = launch_config.start(stdout=node_log, stderr=subprocess.STDOUT,
                                   env=env, namespace="/bench_load",
                                   overrides={**OVERRIDES, "store_path": store_file})
        try:
            total_s = args.rounds * (args.nominal_s + args.load_s)
            drv = subprocess.run([sys.executable, DRIVER, "--namespace", "/bench_load",
                                  "--node-pid", str(node.pid), "--phases", phases],
                                 capture_output=True, text=True, env=env, timeout=total_s + 300)
        finally:
            node.send_signal(signal.SIGINT)
            try:
                code = node.wait(timeout=30)
            except subprocess.TimeoutExpired:
                node.kill()
                code = node.wait()
        lines = [x for x in drv.stdout.splitlines() if x.startswith("{")]
        if drv.returncode != 0 or not lines:
            print(f"bench_load: driver failed (exit {drv.returncode})")
            node_log.seek(0)
            print(drv.stderr[-3000:] + "\nnode log, last lines:\n" + node_log.read()[-2000:],
                  file=sys.stderr)
            return 1
        r = json.loads(lines[-1])
        with sqlite3.connect(f"file:{store_file}?mode=ro", uri=True) as db:
            stored = db.execute("SELECT count(*) FROM events").fetchone()[0]

    by_level = {}
    for ph in r["phases"]:
        agg = by_level.setdefault(ph["level"], {"s": 0.0, "people_sent": 0, "people_rx": 0,
                                                "needs": 0, "cpu_s": 0.0, "first": [],
                                                "again": []})
        agg["s"] += ph["duration_s"]
        agg["people_sent"] += ph["people_sent"]
        agg["people_rx"] += ph["people_received"]
        agg["needs"] += ph["needs_sent"]
        agg["cpu_s"] += ph["node_cpu_s"]
        agg["first"] += ph["first_decision_s"]
        agg["again"] += ph["redecision_s"]
    print(f"node process under load, {args.rounds} rounds of 1x {args.nominal_s:g} s then "
          f"10x {args.load_s:g} s (alternating: both loads see the same machine)")
    print(f"{'load':5}  {'seconds':>7}  {'people/s':>8}  {'per doc':>7}  {'needs/s':>7}  "
          f"{'people rx %':>11}  {'node CPU-s':>10}  {'CPU-s/s':>7}")
    for level in ("1x", "10x"):
        a = by_level[level]
        n_people = r["levels"][level]["people"]
        print(f"{level:5}  {a['s']:7.1f}  {a['people_sent'] / a['s']:8.1f}  {n_people:7d}  "
              f"{a['needs'] / a['s']:7.2f}  "
              f"{100.0 * a['people_rx'] / max(a['people_sent'], 1):11.1f}"
              f"  {a['cpu_s']:10.2f}  {a['cpu_s'] / a['s']:7.3f}")
    print("(people rx: share of the people documents sent that the node counted, /diagnostics)")
    print()
    print(f"{'decision latency':30}  {'n':>5}  {'p50 ms':>8}  {'p95 ms':>8}  {'p99 ms':>8}  "
          f"{'max ms':>8}")
    for level in ("1x", "10x"):
        print(row(f"{level} open need -> decision", by_level[level]["first"]))
        print(row(f"{level} outcome -> next decision", by_level[level]["again"]))
    rss = r["rss_kib"]
    mid = min(rss, key=lambda s: abs(s[0] - r["load_elapsed_s"] / 2.0))[1]
    print()
    print(f"node RSS: start {rss[0][1] / 1024:.1f} MiB, mid {mid / 1024:.1f} MiB, end "
          f"{rss[-1][1] / 1024:.1f} MiB, max {max(k for _, k in rss) / 1024:.1f} MiB "
          f"({len(rss)} samples over {r['load_elapsed_s']:.0f} s)")
    sent = len(r["outcomes_sent"])
    print(f"needs {r['needs']}, decided {r['needs_decided']}, decisions {r['decisions']} "
          f"(mean {r['decision_bytes_mean'] / 1e3:.1f} kB), outcomes sent {sent}, stored "
          f"{stored}, lost {sent - stored}; node exit code {code}")
    # both latencies are "input on a reliable topic -> decision": pooled for the ratio, since
    # the nominal load has only one need in 10 s
    one = by_level["1x"]["first"] + by_level["1x"]["again"]
    ten = by_level["10x"]["first"] + by_level["10x"]["again"]
    if one and ten:
        print(f"ratio of median input -> decision latency, 10x / 1x: "
              f"{pct_ms(ten, 0.5) / pct_ms(one, 0.5):.2f}  (1x n={len(one)}, 10x n={len(ten)})")
    return 0 if sent == stored and code == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
