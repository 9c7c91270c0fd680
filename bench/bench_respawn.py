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

"""Benchmark: how soon a decision node killed with SIGKILL and started again answers a help need.

Beside a clean first start, against inputs that stay up the whole time.

A separate long-lived process (test/reliability/long_lived_inputs.py) publishes `people` at
10 Hz and, for each node start, opens a help need every 0.1 s until the node decides one with
every person in view among its candidates: perception and the behaviour layer as a robot has
them, never restarted.  The node is started through ros/launch_config.py (as the launch file
does), on one SQLite store for the whole run.
- clean start: a fresh long-lived process, settled for 3 s, then the node; nobody has talked to
  a node before.  The node is stopped with SIGINT at the end of the round.
- respawn: the node is SIGKILLed 0.3-1.3 s (random) after its decision and started again at
  once (`respawn:=true` in the launch file restarts it the same way), against the same
  long-lived process.
Variants, interleaved round by round (each round starting with the next) so that all see the
same machine:
- whole robot on the profile (the headline): every process on the middleware profile
  config/fastdds_robot.xml, as docs/integration.md ("Respawn") has the bringup export it: the
  node as launch_config starts it
  (the profile; at start-up it holds the dead instance's shared-memory ports and those live
  processes still map from removed files, so its participant takes fresh ones) and the
  long-lived process on the profile too;
- node alone on the profile: the long-lived process on the middleware's defaults (a bringup that
  did not export the profile);
- no profile anywhere: both on the middleware's defaults;
- no port hold: the whole robot on the profile, but with HELPAWARE_SHM_PORT_HOLD=0 the node
  removes the dead instance's files before its participant starts and holds no port, so it
  takes the dead instance's port numbers again (the node before this work, files aside).
Prints, for the headline variant, the median, p95 and maximum time from process start to each
phase: the DDS participant up (the node's shared-memory segment created: Python start, imports,
rclpy init), node configured (its `configured:` log line: parameters, store, topics), matched
by the long-lived side (its publisher's matched event), first `people` and `task_status`
message heard (the node's input watchdog in /diagnostics), first decision received by the
long-lived process; then the steps between phases (what the time goes to) and respawn p95 over
the clean median (target <= 2); then every variant side by side, with the starts that heard
nothing within 30 s (deaf).
Run: .venv/bin/python bench/bench_respawn.py [--rounds 5 --respawns 5]  (loopback, own domain)
"""
from __future__ import annotations

import argparse
from dataclasses import dataclass
import os
import random
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from typing import Optional

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, ".."))
from ros_domain import loopback_own_domain  # noqa: E402  (bench/ is this script's folder)

loopback_own_domain()
sys.path.insert(0, os.path.join(HERE, "..", "test", "reliability"))
# I100: loopback_own_domain() sets the DDS environment before anything of helpaware_node.ros loads
from helpaware_node.ros import shm_files  # noqa: E402,I100
from long_lived_inputs import LongLivedProcess  # noqa: E402  (the robot's long-lived side)

NAMESPACE = "/respawn_bench"
PROFILE_FILE = "fastdds_robot.xml"
PROFILE_ENV = "FASTDDS_DEFAULT_PROFILES_FILE"
DECISION_DEADLINE_S = 30.0      # a start that heard nothing by then counts as deaf
# before a clean start: a participant met within about a second of its own start was often
# not matched until its next periodic announcement (seen while writing this benchmark)
SETTLE_S = 3.0
CONFIGURED_RE = re.compile(r"\[INFO\] \[(\d+\.\d+)\] \[[^\]]*\]: configured:")
PHASES = (("participant", "DDS participant up"), ("configured", "node configured"),
          ("matched", "matched by the long-lived side"),
          ("people", "first people heard"), ("task_status", "first task_status heard"),
          ("decision", "first decision"))


def pct(xs, q):
    """Nearest-rank percentile."""
    s = sorted(xs)
    return s[min(len(s) - 1, max(0, -(-int(q * 1000) * len(s) // 1000) - 1))]


@dataclass
class Start:
    kind: str
    variant: str
    spawn_s: float
    at: dict            # phase -> wall time (missing when not measured)


def participant_up_s(pid: int) -> Optional[float]:
    """When the node's own shared-memory segment was created (its lock file, random name)."""
    times = []
    try:
        for fd in os.listdir(f"/proc/{pid}/fd"):
            try:
                target = os.readlink(f"/proc/{pid}/fd/{fd}")
            except OSError:
                continue
            if target.startswith("/dev/shm/") and shm_files.SEGMENT_LOCK_RE.match(
                    target[len("/dev/shm/"):]):
                times.append(os.stat(target).st_mtime)
    except OSError:
        return None
    return min(times) if times else None


def configured_s(log_path: str) -> Optional[float]:
    with open(log_path, encoding="utf-8", errors="replace") as fh:
        for line in fh:
            m = CONFIGURED_RE.search(line)
            if m:
                return float(m.group(1))
    return None


def run_start(launch_config, inputs: LongLivedProcess, env: dict, tmp: str, tag: str, kind: str,
              variant: str, store_path: str) -> tuple[Start, subprocess.Popen]:
    """Start the node while the long-lived process probes; return its phase times."""
    log_path = os.path.join(tmp, f"{tag}.log")
    inputs.probe(tag)
    with open(log_path, "w") as log:
        spawn = time.time()
        proc = launch_config.start(stdout=log, stderr=subprocess.STDOUT, env=env,
                                   namespace=NAMESPACE,
                                   overrides={"store_path": store_path,
                                              "robot_id": "bench-respawn"})
    at = {}
    doc = inputs.wait_probe(tag, DECISION_DEADLINE_S)
    if doc is not None:
        at["decision"] = doc["decided_wall_s"]
    up = participant_up_s(proc.pid)
    if up is not None:
        at["participant"] = up
    matched = [m["wall_s"] for m in list(inputs.matches)
               if m.get("matched") == "people" and m["wall_s"] > spawn]
    if matched:
        at["matched"] = min(matched)
    conf = configured_s(log_path)
    if conf is not None:
        at["configured"] = conf
        diag = inputs.diag_after(at.get("decision", time.time()), 3.0)
        for topic in ("people", "task_status"):
            after = diag.get(f"{topic}.first_message_after_s", "")
            if after not in ("", None):
                at[topic] = conf + float(after)
    return Start(kind, variant, spawn, at), proc


def phase_table(starts: list[Start]) -> list[str]:
    kinds = [("clean", "clean first start"), ("respawn", "respawn after SIGKILL")]
    head, sub = f"{'time from process start, s':31}", f"{'':31}"
    for kind, label in kinds:
        n = sum(1 for s in starts if s.kind == kind)
        head += f"  {label + f' (n={n})':>26}"
        sub += f"  {'median':>8}{'p95':>9}{'max':>9}"
    lines = [head, sub]
    for key, label in PHASES:
        row = f"{label:31}"
        for kind, _ in kinds:
            xs = [s.at[key] - s.spawn_s for s in starts if s.kind == kind and key in s.at]
            row += (f"  {pct(xs, 0.5):8.2f} {pct(xs, 0.95):8.2f} {max(xs):8.2f}" if xs
                    else f"  {'-':>8} {'-':>8} {'-':>8}")
        lines.append(row)
    return lines


def step_times(s: Start) -> Optional[dict]:
    """One start's time split into consecutive steps (they add up to the first decision)."""
    if not all(k in s.at for k in ("participant", "configured", "matched", "people",
                                   "decision")):
        return None
    a = s.at
    ready = max(a["configured"], a["matched"])
    return {"python": a["participant"] - s.spawn_s,
            "configure": a["configured"] - a["participant"],
            "discovery": max(0.0, a["matched"] - a["configured"]),
            "delivery": max(0.0, a["people"] - ready),
            "decide": max(0.0, a["decision"] - max(a["people"], ready))}


STEPS = (("python", "process start to DDS participant (Python, imports, rclpy init)"),
         ("configure", "participant to node configured (parameters, store, topics)"),
         ("discovery", "configured to matched by the long-lived side (discovery)"),
         ("delivery", "matched to first people message heard (delivery)"),
         ("decide", "first people heard to decision received"))


def step_table(starts: list[Start]) -> list[str]:
    lines = [f"{'where the time goes, s per start':64}  {'clean':>7}  {'respawn':>7}  "
             f"{'respawn':>7}",
             f"{'':64}  {'median':>7}  {'median':>7}  {'p95':>7}"]
    split = {k: [t for t in (step_times(s) for s in starts if s.kind == k) if t]
             for k in ("clean", "respawn")}
    for key, label in STEPS:
        xs = {k: [t[key] for t in split[k]] for k in split}
        row = f"{label:64}"
        for kind, q in (("clean", 0.5), ("respawn", 0.5), ("respawn", 0.95)):
            row += f"  {pct(xs[kind], q):7.2f}" if xs[kind] else f"  {'-':>7}"
        lines.append(row)
    return lines


def first_decision_s(starts: list[Start], kind: str) -> list[float]:
    """Process start to first decision; a start that never answered counts as infinite."""
    return [s.at["decision"] - s.spawn_s if "decision" in s.at else float("inf")
            for s in starts if s.kind == kind]


def comparison(starts: list[Start], variants: list[str]) -> list[str]:
    lines = [f"{'process start to first decision, s':34}  {'clean':>7}  {'respawn':>7}  "
             f"{'p95':>7}  {'max':>7}  {'deaf':>4}  {'p95/clean':>9}",
             f"{'':34}  {'median':>7}  {'median':>7}"]
    for name in variants:
        mine = [s for s in starts if s.variant == name]
        clean, again = first_decision_s(mine, "clean"), first_decision_s(mine, "respawn")
        if not clean or not again:
            continue
        deaf = sum(1 for x in again if x == float("inf"))
        ratio = pct(again, 0.95) / pct(clean, 0.5)
        lines.append(f"{name + f' (n={len(again)})':34}  {pct(clean, 0.5):7.2f}  "
                     f"{pct(again, 0.5):7.2f}  {pct(again, 0.95):7.2f}  {max(again):7.2f}  "
                     f"{deaf:4d}  {ratio:9.2f}")
    return lines


DEFAULTS_PROFILE = ('<?xml version="1.0" encoding="UTF-8" ?>\n'
                    '<dds xmlns="http://www.eprosima.com">'
                    '<profiles><participant profile_name="middleware_defaults" '
                    'is_default_profile="true"><rtps/></participant></profiles></dds>\n')


def variants(profile: str, defaults_profile: str) -> dict:
    """Return the variants: name -> node environment, process environment, share of respawns.

    name -> (environment of the node, of the long-lived process, share of the respawns per round).
    Every process gets the profile variable, so none falls back to what launch_config would choose.
    """
    with_profile = {PROFILE_ENV: profile}
    without = {PROFILE_ENV: defaults_profile}
    return {
        # the robot as the docs have it brought up: every process on the profile
        "whole robot on the profile": (with_profile, with_profile, 1.0),
        # the node as launch_config starts it; the rest of the robot on the defaults
        "node alone on the profile": (with_profile, without, 0.6),
        "no profile anywhere": (without, without, 0.6),
        # the dead instance's files removed before the participant starts, no port held: the
        # node takes the dead instance's port numbers again
        "no port hold": (dict(with_profile, **{shm_files.HOLD_ENV: "0"}), with_profile, 0.6),
    }


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rounds", type=int, default=5, help="rounds; each runs every variant")
    ap.add_argument("--respawns", type=int, default=5,
                    help="SIGKILL respawns per round of the shipped variant (others: 60 %%)")
    ap.add_argument("--only", default="", help="run one variant (by its name)")
    ap.add_argument("--profile", default=os.path.join(HERE, "..", "config", PROFILE_FILE),
                    help="middleware profile of the variants that use one")
    ap.add_argument("--seed", type=int, default=19)
    args = ap.parse_args()
    from helpaware_node.ros import launch_config
    rng = random.Random(args.seed)
    tmp_root = tempfile.mkdtemp(prefix="bench_respawn_")
    with open(os.path.join(tmp_root, "defaults.xml"), "w") as fh:
        fh.write(DEFAULTS_PROFILE)
    table = {k: v for k, v in variants(os.path.abspath(args.profile),
                                       os.path.join(tmp_root, "defaults.xml")).items()
             if not args.only or k == args.only}
    starts: list[Start] = []
    load_before = os.getloadavg()[0]
    t0 = time.monotonic()
    with tempfile.TemporaryDirectory(dir=tmp_root) as tmp:
        base_env = dict(os.environ, ROS_HOME=os.path.join(tmp, "ros_home"))
        store_path = os.path.join(tmp, "beliefs.sqlite3")
        names = list(table)
        for rnd in range(args.rounds):          # rounds interleave the variants: same machine
            # each round starts with another variant, so none always follows the same one
            for name in names[rnd % len(names):] + names[:rnd % len(names)]:
                node_extra, inputs_extra, share = table[name]
                env = dict(base_env, **node_extra)
                inputs = LongLivedProcess(NAMESPACE, dict(base_env, **inputs_extra))
                time.sleep(SETTLE_S)     # a robot's perception has been up a while
                proc = None
                try:
                    tag = f"r{rnd}-{len(starts)}"
                    start, proc = run_start(launch_config, inputs, env, tmp, tag, "clean", name,
                                            store_path)
                    starts.append(start)
                    for _ in range(max(1, round(args.respawns * share))):
                        time.sleep(rng.uniform(0.3, 1.3))   # the kill lands anywhere in a cycle
                        os.kill(proc.pid, signal.SIGKILL)
                        proc.wait(timeout=30)
                        start, proc = run_start(launch_config, inputs, env, tmp,
                                                f"r{rnd}-{len(starts)}", "respawn", name,
                                                store_path)
                        starts.append(start)
                finally:
                    if proc is not None:
                        launch_config.stop(proc)
                    inputs.stop()
            print(f"bench_respawn: round {rnd + 1}/{args.rounds} ({time.monotonic() - t0:.0f} s)",
                  file=sys.stderr, flush=True)
    print(f"bench_respawn  rmw_fastrtps_cpp, ROS_AUTOMATIC_DISCOVERY_RANGE="
          f"{os.environ['ROS_AUTOMATIC_DISCOVERY_RANGE']}, {os.cpu_count()} CPUs, load average "
          f"{load_before:.1f} at start, {os.getloadavg()[0]:.1f} at end, "
          f"{time.monotonic() - t0:.0f} s")
    first = next(iter(table))
    mine = [s for s in starts if s.variant == first]
    print(f"\n[{first}]")
    for line in phase_table(mine) + [""] + step_table(mine):
        print(line)
    clean, again = first_decision_s(mine, "clean"), first_decision_s(mine, "respawn")
    ratio = pct(again, 0.95) / pct(clean, 0.5)
    print(f"respawn p95 / clean median: {ratio:.2f} (target <= 2): "
          f"{'met' if ratio <= 2.0 else 'not met'}")
    print("")
    for line in comparison(starts, list(table)):
        print(line)
    print(f"deaf: no decision within {DECISION_DEADLINE_S:.0f} s (counted as infinite)")
    shutil.rmtree(tmp_root, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
