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

"""The demo's scenario process: an invented teaching hospital's night shift, sped up.

A supply robot carries linen and lab kits between wards and needs badge doors opened and
elevators called.  Forty invented staff with invented willingness pass by, charting, on a
call, walking fast or with a patient.  This process owns the clock (/clock, the node runs with
use_sim_time), so a whole night passes in seconds: at each help need it holds the clock, shows
the node who is in view, opens the need, waits for the decision, answers an ask from the
invented ground truth, and resolves the need.  It prints one line per decision and a summary.

The invented truth differs from the constants the node starts with (the site file's, the
shipped defaults apart from k_busy): night staff are less willing than the default prior says
(willingness ~ Beta(1.2, 2.6), mean 0.32, against Beta(2, 2)), busyness weighs more
(TRUE_K_BUSY), and an ask weighs on a person for hours (TRUE_HALF_LIFE_S against 30 min). The
node learns the site as the night goes on (site learning); each new revision it puts in
force is printed when the first decision made with it arrives.
"""
from __future__ import annotations

import argparse
from dataclasses import dataclass
import json
import math
import random
import sys
import time
from typing import Any

ACTIVITIES = {  # activity -> (busyness range, share of sightings)
    "idle": ((0.0, 0.15), 0.20),
    "charting": ((0.2, 0.45), 0.30),
    "walking_fast": ((0.5, 0.8), 0.25),
    "on_call": ((0.6, 0.9), 0.10),
    "with_patient": ((0.8, 1.0), 0.15),
}
ROLES = ("nurse", "porter", "doctor", "tech", "cleaner")
FIRST = ("Ama", "Bo", "Cyd", "Dara", "Eli", "Fen", "Gus", "Hana", "Ivo", "Juno", "Kit", "Lior",
         "Mae", "Nico", "Oona", "Pax", "Quin", "Rhea", "Sol", "Tove")
KINDS = (("door", 0.55), ("elevator", 0.35), ("handover", 0.10))
SHIFT_START_S = 22 * 3600.0       # 22:00 on the demo's (invented) first day
# the invented site's truth (the node never sees it): help = w exp(-(k_busy x + k_load f))
TRUE_PRIOR = (1.2, 2.6)
TRUE_K_BUSY = 3.5
TRUE_K_LOAD = 1.0
TRUE_HALF_LIFE_S = 3 * 3600.0


@dataclass
class Staff:
    person_id: str
    name: str
    role: str
    ward: int
    willingness: float           # invented ground truth; the node never sees it
    asked: int = 0
    helped: int = 0
    learned_mean: float = float("nan")
    ask_times_s: tuple = ()          # every ask that reached this person (the truth's load)


def invent_staff(rng: random.Random, n: int = 40) -> list[Staff]:
    staff = []
    for i in range(n):
        role = ROLES[i % len(ROLES)]
        name = f"{FIRST[i % len(FIRST)]} {chr(65 + i // len(FIRST))}."
        staff.append(Staff(f"{role}-{i:02d}", name, role, 1 + i % 6,
                           min(0.97, max(0.03, rng.betavariate(*TRUE_PRIOR)))))
    return staff


def pick_activity(rng: random.Random) -> tuple[str, float]:
    r, acc = rng.random(), 0.0
    for act, ((lo, hi), share) in ACTIVITIES.items():
        acc += share
        if r <= acc:
            return act, round(rng.uniform(lo, hi), 2)
    return "idle", 0.05


def clock_text(t_s: float) -> str:
    m = int(t_s // 60) % (24 * 60)
    return f"{m // 60:02d}:{m % 60:02d}"


def answer(rng: random.Random, person: Staff, busyness: float, t_s: float) -> str:
    """Invented ground truth.

    Helps with w exp(-(k_busy x + k_load f)), f the person's earlier asks decayed with
    TRUE_HALF_LIFE_S; some asks go unnoticed.
    """
    if rng.random() < 0.04:
        return "could_not_ask"
    load = sum(2.0 ** (-(t_s - a) / TRUE_HALF_LIFE_S) for a in person.ask_times_s)
    person.ask_times_s += (t_s,)
    if rng.random() < 0.08:
        return "no_response"
    p = person.willingness * math.exp(-(TRUE_K_BUSY * busyness + TRUE_K_LOAD * load))
    return "helped" if rng.random() < p else "declined"


def constants_line(params: dict) -> str:
    """Return the site constants a decision was made with, and where they came from."""
    m = params.get("model", {})
    src = params.get("source", {})
    where = (f"learned revision {src.get('revision')}" if src.get("site_constants") == "learned"
             else "parameter file")
    mean = m["prior_a"] / (m["prior_a"] + m["prior_b"]) if "prior_a" in m else float("nan")
    return (f"prior mean {mean:.2f} (a {m.get('prior_a', 0):.2f}, b {m.get('prior_b', 0):.2f}), "
            f"k_busy {m.get('k_busy', 0):.2f}, k_load {m.get('k_load', 0):.2f}, ask memory "
            f"{m.get('ask_memory_half_life_s', 0) / 60:.0f} min ({where})")


# a decision takes milliseconds; a machine loaded by other work can hold the node for seconds
DECISION_WAIT_S = 15.0


def run(namespace: str = "", needs: int = 60, seed: int = 11, timeout_s: float = 45.0,
        out=print) -> int:
    import rclpy
    from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
    from rosgraph_msgs.msg import Clock
    from std_msgs.msg import String

    from .. import wire

    rng = random.Random(seed)
    staff = invent_staff(rng)
    by_id = {s.person_id: s for s in staff}
    reliable = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)
    rclpy.init()
    node = rclpy.create_node("night_shift_scenario", namespace=namespace)
    clock_pub = node.create_publisher(Clock, "/clock", 10)
    people_pub = node.create_publisher(String, "people", qos_profile_sensor_data)
    task_pub = node.create_publisher(String, "task_status", reliable)
    outcome_pub = node.create_publisher(String, "outcome", reliable)
    decisions: dict[str, list[dict]] = {}

    def on_decision(msg):
        d = json.loads(msg.data)
        decisions.setdefault(d["request_id"], []).append(d)

    node.create_subscription(String, "decision", on_decision, reliable)
    real_end = time.monotonic() + timeout_s

    def spin_for(seconds: float, until=lambda: False) -> bool:
        end = min(time.monotonic() + seconds, real_end)
        while time.monotonic() < end and not until():
            rclpy.spin_once(node, timeout_sec=0.01)
        return until()

    def set_clock(t_s: float) -> None:
        msg = Clock()
        msg.clock.sec = int(t_s)
        msg.clock.nanosec = int((t_s - int(t_s)) * 1e9)
        clock_pub.publish(msg)

    def wait_decision(rid: str, t_s: float) -> bool:
        """Spin until the need is decided.

        Publishing the held clock as a paused simulator does (a reading lost before the node's
        /clock matched must not leave it at zero).
        """
        end = time.monotonic() + DECISION_WAIT_S
        while time.monotonic() < end:
            set_clock(t_s)
            if spin_for(0.1, lambda: rid in decisions):
                return True
        return False

    ready = spin_for(30.0, lambda: clock_pub.get_subscription_count() > 0
                     and task_pub.get_subscription_count() > 0
                     and outcome_pub.get_subscription_count() > 0
                     and people_pub.get_subscription_count() > 0
                     and node.count_publishers("decision") > 0)
    if not ready:
        out("scenario: the decision node did not come up")
        return 1
    out(f"{'time':5}  {'need':8}  {'ward':4}  {'in view':7}  {'decision':30}  outcome")
    out("-" * 78)
    t = SHIFT_START_S
    counts = {"ask": 0, "continue": 0, "helped": 0, "declined": 0, "no_response": 0,
              "could_not_ask": 0}
    limits: dict[str, int] = {}
    in_force = None                   # (source, revision) of the last decision's constants
    first_params = last_params = None
    for k in range(needs):
        if time.monotonic() > real_end:
            out("scenario: time budget used up; stopping early")
            break
        t += rng.uniform(120.0, 600.0)                       # 2 to 10 minutes between needs
        ward = rng.randint(1, 6)
        local = [s for s in staff if s.ward == ward] + rng.sample(staff, 4)
        view: list[dict[str, Any]] = []
        seen = set()
        for s in rng.sample(local, min(len(local), rng.randint(1, 5))):
            if s.person_id in seen:
                continue
            seen.add(s.person_id)
            act, x = pick_activity(rng)
            view.append({"id": s.person_id, "distance_m": round(rng.uniform(0.8, 7.5), 1),
                         "busyness": x, "activity": act})
        kind = rng.choices([k_ for k_, _ in KINDS], [w for _, w in KINDS])[0]
        rid = f"n{k:03d}-{kind}"
        for _ in range(3):                 # hold the clock; let the view arrive (best effort)
            set_clock(t)
            people_pub.publish(String(data=wire.people_document(view, t, frame_id="map")))
            spin_for(0.03)
        task_pub.publish(String(data=wire.task_status_document(
            rid, "open", kind, urgency=round(rng.uniform(0.0, 0.6), 2), stamp_s=t)))
        if not wait_decision(rid, t):
            out(f"{clock_text(t)}  {kind:8}  no decision within {DECISION_WAIT_S:.0f} s")
            continue
        d = decisions[rid][0]
        params = d.get("parameters") or {}
        source = params.get("source", {})
        now_in_force = (source.get("site_constants", "parameter_file"), source.get("revision", 0))
        if now_in_force != in_force:
            verb = "start" if in_force is None else "site learning put in force"
            out(f"  -- {verb}: {constants_line(params)}")
            in_force = now_in_force
        first_params = first_params or params
        last_params = params
        for row in d["rationale"]:
            if row["excluded"]:
                limits[row["excluded"]] = limits.get(row["excluded"], 0) + 1
            if row["person_id"] in by_id:
                by_id[row["person_id"]].learned_mean = row["mean"]
        counts[d["action"]] += 1
        if d["action"] == "ask":
            who = by_id[d["person_id"]]
            row = next(r for r in d["rationale"] if r["person_id"] == who.person_id)
            x = next(v["busyness"] for v in view if v["id"] == who.person_id)
            result = answer(rng, who, x, t)
            counts[result] += 1
            who.asked += result != "could_not_ask"
            who.helped += result == "helped"
            set_clock(t + 20.0)
            outcome_pub.publish(String(data=wire.outcome_document(rid, who.person_id, result,
                                                                  stamp_s=t + 20.0)))
            spin_for(0.05)
            text = f"ask {who.name} ({who.role}, p={row['p']:.2f})"
        else:
            result = ""
            text = f"continue ({d['why']})"
        out(f"{clock_text(t)}  {kind:8}  {ward:4}  {len(view):7}  {text:30}  {result}")
        task_pub.publish(String(data=wire.task_status_document(rid, "resolved", stamp_s=t + 30.0)))
        spin_for(0.01)
    out("-" * 78)
    asked = counts["ask"]
    out(f"needs {counts['ask'] + counts['continue']}: asked {asked}, carried on alone "
        f"{counts['continue']}; helped {counts['helped']}, declined {counts['declined']}, "
        f"no response {counts['no_response']}, could not ask {counts['could_not_ask']}")
    if limits:
        out("limits that kept people out: "
            + ", ".join(f"{k} {v}" for k, v in sorted(limits.items())))
    out("")
    out(f"{'staff':10}  {'role':7}  {'asked':5}  {'helped':6}  {'invented w':10}  learned mean")
    for s in sorted(staff, key=lambda s: -s.asked)[:10]:
        learned = "-" if math.isnan(s.learned_mean) else f"{s.learned_mean:.2f}"
        out(f"{s.name:10}  {s.role:7}  {s.asked:5}  {s.helped:6}  {s.willingness:10.2f}  "
            f"{learned}")
    out("(learned mean: the node's belief at the last decision that person was part of)")
    if last_params and first_params:
        out("")
        out(f"site constants at the start: {constants_line(first_params)}")
        out(f"site constants at the end:   {constants_line(last_params)}")
        a, b = TRUE_PRIOR
        out(f"invented truth:              prior mean {a / (a + b):.2f} (a {a:.2f}, b {b:.2f}), "
            f"k_busy {TRUE_K_BUSY:.2f}, k_load {TRUE_K_LOAD:.2f}, ask memory "
            f"{TRUE_HALF_LIFE_S / 60:.0f} min")
    node.destroy_node()
    rclpy.try_shutdown()
    return 0


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--namespace", default="")
    p.add_argument("--needs", type=int, default=60)
    p.add_argument("--seed", type=int, default=11)
    p.add_argument("--timeout-s", type=float, default=45.0)
    a = p.parse_args(argv)
    try:
        return run(a.namespace, a.needs, a.seed, a.timeout_s,
                   out=lambda s: print(s, flush=True))
    except KeyboardInterrupt:
        return 130


if __name__ == "__main__":
    sys.exit(main())
