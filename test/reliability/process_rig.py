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

"""Node processes under fault: start them as users do, drive them from here, kill, read the store.

- `start_node` goes through `ros/launch_config.py` (the same command the launch file, the demo
  and the cross-process test use); every child inherits ROS_DOMAIN_ID and
  ROS_AUTOMATIC_DISCOVERY_RANGE=LOCALHOST from os.environ (test/conftest.py sets both).
- `Drive` runs in the test process on its own rclpy context: it shows people, keeps a few help
  needs open and answers every ask at once. An outcome counts as acknowledged when the node
  has re-published its event on its fleet topic, which the node does only after store.append
  has committed.
- `read_store` opens the SQLite file read-only with the sqlite3 module (not SqliteStore), so
  the check does not go through the code it checks.
"""
from __future__ import annotations

from dataclasses import dataclass, field
import json
import os
from pathlib import Path
import random
import signal
import sqlite3
import subprocess
import time

from helpaware_node import wire
from helpaware_node.core import Belief, fold_events, Result, SiteModel
from helpaware_node.core.model import from_plain
from helpaware_node.ros import launch_config
from helpaware_node.ros.fleet import fleet_qos, FLEET_TOPIC
from helpaware_node.store.base import person_key, StoredEvent
import rclpy
from rclpy.context import Context
from rclpy.executors import SingleThreadedExecutor
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
import site_keys
from std_msgs.msg import String

RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)
SITE_KEY = bytes(range(7, 39))            # fixed 32-byte site key shared by the test robots
SHARED_FLEET_TOPIC = FLEET_TOPIC         # the default: site-wide, no remapping
# limits opened wide so the node asks as often as the driver can answer: this is a crash
# test of the write path, not of the limits (those have their own suite)
FAST_ASKING = {
    "min_reask_interval_s": 0.0,
    "max_asks_per_person_per_day": 1000,
    "max_asks_per_hour": 1000,
    "ask_memory_half_life_s": 0.5,
    "interruption_weight_s": 0.0,
}


def write_site_key(directory: Path) -> Path:
    """Return the store looks for `site_key` beside the store file.

    Owner-only, as the store demands.
    """
    return site_keys.write_site_key(directory, SITE_KEY)


def own_fleet_topic(namespace: str) -> str:
    """Return a fleet topic of the robot's own, for a test that must not hear other robots."""
    return f"{namespace}/helpaware/fleet"


def start_node(store_path: Path, robot_id: str, namespace: str, log_path: Path,
               shared_fleet: bool = False, limits: dict | None = None) -> subprocess.Popen:
    """`limits`: parameters set over FAST_ASKING (tests of the limits themselves)."""
    remaps = launch_config.REMAPS
    overrides = dict(FAST_ASKING, **(limits or {}), store_path=str(store_path),
                     robot_id=robot_id)
    if not shared_fleet:                 # the shared one is the default, /helpaware/fleet
        overrides["fleet_topic"] = own_fleet_topic(namespace)
    log = open(log_path, "a")
    try:
        return launch_config.start(stdout=log, stderr=subprocess.STDOUT, namespace=namespace,
                                   remaps=remaps, overrides=overrides)
    finally:
        log.close()                      # the child holds its own copy


def kill_hard(proc: subprocess.Popen) -> None:
    """SIGKILL the node process itself (the Popen child is the node's Python, no wrapper)."""
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait(timeout=30)


def stop_gently(proc: subprocess.Popen) -> None:
    launch_config.stop(proc, timeout_s=15)


# ---------------------------------------------------------------- the store, read-only
@dataclass
class StoreView:
    integrity: list[str]
    events: dict[str, StoredEvent]
    snapshot: dict[str, Belief]
    model: SiteModel

    def refold(self, key: str, model: SiteModel | None = None) -> Belief:
        """Fold this key's stored events with core.person.fold_events.

        No compaction happens in these runs. `model`: the constants to fold under (default:
        the store's own, the parameter file's).
        """
        mine = [e.to_outcome() for e in self.events.values() if e.person_key == key]
        return fold_events(mine, model or self.model)[0]


def read_store(path: Path) -> StoreView:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=10.0)
    try:
        integrity = [r[0] for r in conn.execute("PRAGMA integrity_check")]
        events = {r[0]: StoredEvent(r[0], r[1], r[2], Result(r[5]), r[3], r[4], r[6])
                  for r in conn.execute("SELECT event_id, person_key, time_s, busyness, "
                                        "ask_load, result, request_kind FROM events")}
        snapshot = {r[0]: Belief(r[1], r[2])
                    for r in conn.execute("SELECT person_key, a, b FROM snapshot")}
        meta = dict(conn.execute("SELECT name, value FROM meta"))
    finally:
        conn.close()
    return StoreView(integrity, events, snapshot,
                     from_plain(SiteModel, json.loads(meta["site_model"])))


def stored_asks(path: Path) -> list[tuple[str, str, float]]:
    """(event id, person key, time) of every stored ask, read-only (not through the store)."""
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=10.0)
    try:
        return [tuple(r) for r in conn.execute("SELECT event_id, person_key, time_s FROM asks "
                                               "ORDER BY time_s, event_id")]
    finally:
        conn.close()


def event_ids(path: Path) -> set[str]:
    """Return the stored event ids only (a light read while the node writes: WAL readers share)."""
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=10.0)
    try:
        return {r[0] for r in conn.execute("SELECT event_id FROM events")}
    finally:
        conn.close()


class Every:
    """A predicate checked at most every `period_s` (store reads inside a fast spin loop)."""

    def __init__(self, predicate, period_s: float = 0.2) -> None:
        self._predicate, self._period_s = predicate, period_s
        self._next_s, self._last = 0.0, False

    def __call__(self) -> bool:
        now = time.monotonic()
        if now >= self._next_s:
            self._next_s = now + self._period_s
            self._last = bool(self._predicate())
        return self._last


# ---------------------------------------------------------------- the driver
@dataclass
class Robot:
    """One node process as the driver sees it."""

    robot_id: str
    namespace: str
    fleet_topic: str
    people: list[dict]
    results: random.Random
    window: int = 4
    running: bool = False
    acked: set[str] = field(default_factory=set)        # own event ids heard on the fleet topic
    decisions: list[dict] = field(default_factory=list)
    asks_answered: int = 0
    needs_opened: int = 0
    last_progress_s: float = 0.0
    _open: set[str] = field(default_factory=set)


class Drive:
    """The test process's side: one rclpy context, publishers per robot, bounded spinning."""

    def __init__(self, name: str = "fault_driver") -> None:
        self.ctx = Context()
        rclpy.init(context=self.ctx)
        self.node = rclpy.create_node(name, context=self.ctx)
        self.executor = SingleThreadedExecutor(context=self.ctx)
        self.executor.add_node(self.node)
        self.robots: dict[str, Robot] = {}
        self._pubs: dict[str, tuple] = {}
        self.heard: dict[str, set[str]] = {}      # fleet topic -> every event id heard there
        self._fleet_subs: set[str] = set()
        self._tag = 0
        self.node.create_timer(0.1, self._show_people)

    # -- wiring
    def add(self, robot: Robot) -> Robot:
        ns = robot.namespace
        self._pubs[robot.robot_id] = (
            self.node.create_publisher(String, f"{ns}/people", qos_profile_sensor_data),
            self.node.create_publisher(String, f"{ns}/task_status", RELIABLE),
            self.node.create_publisher(String, f"{ns}/outcome", RELIABLE))
        self.node.create_subscription(String, f"{ns}/decision",
                                      lambda m, r=robot: self._on_decision(r, m), RELIABLE)
        if robot.fleet_topic not in self._fleet_subs:
            self._fleet_subs.add(robot.fleet_topic)
            self.heard[robot.fleet_topic] = set()
            self.node.create_subscription(String, robot.fleet_topic,
                                          lambda m, t=robot.fleet_topic: self._on_fleet(t, m),
                                          fleet_qos())
        self.robots[robot.robot_id] = robot
        return robot

    def spin_until(self, predicate, timeout_s: float) -> bool:
        end = time.monotonic() + timeout_s
        while time.monotonic() < end:
            if predicate():
                return True
            self.executor.spin_once(timeout_sec=0.01)
        return predicate()

    def spin_for(self, duration_s: float) -> None:
        """Keep the messages flowing for a while (a random kill moment, not a synchronisation)."""
        self.spin_until(lambda: False, duration_s)

    def close(self) -> None:
        self.executor.shutdown(timeout_sec=1.0)
        self.node.destroy_node()
        rclpy.try_shutdown(context=self.ctx)

    # -- callbacks
    def _show_people(self) -> None:
        now = time.time()
        for rid, robot in self.robots.items():
            self._pubs[rid][0].publish(String(data=wire.people_document(robot.people, now)))

    def _on_fleet(self, topic: str, msg: String) -> None:
        try:
            doc = json.loads(msg.data)
        except (ValueError, RecursionError):   # a hostile peer's document (hostile tests)
            return
        if not isinstance(doc, dict) or doc.get("kind") != "outcome":
            return
        eid = doc["event_id"]
        self.heard[topic].add(eid)
        robot = self.robots.get(eid.rpartition("/")[0])
        if robot is not None and robot.fleet_topic == topic:
            robot.acked.add(eid)
            robot.last_progress_s = time.monotonic()

    def _on_decision(self, robot: Robot, msg: String) -> None:
        doc = json.loads(msg.data)
        robot.decisions.append(doc)
        robot.last_progress_s = time.monotonic()
        rid = doc["request_id"]
        if not robot.running or rid not in robot._open:
            return
        _, task, outcome = self._pubs[robot.robot_id]
        if doc["action"] == "ask":
            roll = robot.results.random()
            result = "helped" if roll < 0.55 else ("declined" if roll < 0.85 else "no_response")
            outcome.publish(String(data=wire.outcome_document(rid, doc["person_id"], result)))
            robot.asks_answered += 1
            if result != Result.HELPED.value:
                return           # the node decides again on this need at once
        task.publish(String(data=wire.task_status_document(rid, "resolved")))
        robot._open.discard(rid)
        self._top_up(robot)

    # -- driving
    def _new_need(self, robot: Robot, kind: str = "door") -> str:
        self._tag += 1
        rid = f"{robot.robot_id}-n{self._tag}"
        robot._open.add(rid)
        robot.needs_opened += 1
        self._pubs[robot.robot_id][1].publish(String(data=wire.task_status_document(
            rid, "open", kind, urgency=1.0)))
        return rid

    def _top_up(self, robot: Robot) -> None:
        while robot.running and len(robot._open) < robot.window:
            self._new_need(robot)

    def start_asking(self, robot: Robot) -> None:
        robot.running = True
        robot.last_progress_s = time.monotonic()
        self._top_up(robot)

    def stop_asking(self, robot: Robot) -> None:
        robot.running = False
        robot._open.clear()

    def keep_going(self, stall_s: float = 2.0) -> None:
        """Re-open the window of a robot that went quiet (a need lost to a dead reader)."""
        now = time.monotonic()
        for robot in self.robots.values():
            if robot.running and now - robot.last_progress_s > stall_s:
                robot._open.clear()
                robot.last_progress_s = now
                self._top_up(robot)

    def run_until(self, predicate, timeout_s: float) -> bool:
        """Spin, answering asks and re-opening stalled windows, until predicate or deadline."""
        end = time.monotonic() + timeout_s
        while time.monotonic() < end:
            if predicate():
                return True
            self.executor.spin_once(timeout_sec=0.01)
            self.keep_going()
        return predicate()

    def probe(self, robot: Robot, timeout_s: float = 60.0) -> dict:
        """Return a decision from a (re)started node with everyone in view among its candidates.

        Needs are re-sent once a second: one published before the node's subscription matched
        is gone (volatile topic), and a killed node's endpoints linger until their lease ends.
        """
        want = {p["id"] for p in robot.people}
        end = time.monotonic() + timeout_s
        while time.monotonic() < end:
            n = len(robot.decisions)
            self._new_need(robot, kind="handover")
            if self.spin_until(lambda: any({c["person_id"] for c in d["candidates"]} == want
                                           for d in robot.decisions[n:]), 1.0):
                return next(d for d in robot.decisions[n:]
                            if {c["person_id"] for c in d["candidates"]} == want)
        raise AssertionError(f"{robot.robot_id}: no decision with all {len(want)} people "
                             f"in view within {timeout_s} s")

    def answer_until_acked(self, robot: Robot, decision: dict, known: set[str],
                           timeout_s: float, result: str = "helped") -> bool:
        """Answer an ask until an event id outside `known` comes back on the fleet topic.

        Re-sent every 2 s: the outcome subscription of a just-started node may match a moment
        after its task_status one; a second copy that arrives is refused (no pending ask).
        """
        text = wire.outcome_document(decision["request_id"], decision["person_id"], result)
        end = time.monotonic() + timeout_s
        while time.monotonic() < end:
            self._pubs[robot.robot_id][2].publish(String(data=text))
            if self.spin_until(lambda: bool(robot.acked - known),
                               min(2.0, end - time.monotonic())):
                return True
        return bool(robot.acked - known)

    def resolve_open(self, robot: Robot) -> None:
        for rid in list(robot._open):
            self._pubs[robot.robot_id][1].publish(String(data=wire.task_status_document(
                rid, "resolved")))
        robot._open.clear()


def beliefs_in(decision: dict, site_key: bytes = SITE_KEY) -> dict[str, Belief]:
    """Return the (a, b) the node used for each candidate, keyed by the hashed person key."""
    return {person_key(site_key, c["person_id"]): Belief(c["a"], c["b"])
            for c in decision["candidates"]}


def staff(n: int, seed: int) -> list[dict]:
    rng = random.Random(seed)
    return [{"id": f"night-staff-{i:02d}", "distance_m": round(rng.uniform(0.8, 6.0), 2),
             "busyness": round(rng.uniform(0.0, 0.6), 2)} for i in range(n)]


# ---------------------------------------------------------------- stand-alone fleet peers
class FleetPeer:
    """`python -m helpaware_node.ros.fleet` (FleetLink on an SQLite store), read line by line."""

    def __init__(self, store_path: Path, key_path: Path, robot_id: str,
                 depth: int | None = None) -> None:
        import queue
        import sys
        import threading
        self.lines: "queue.Queue[str]" = queue.Queue()
        extra = [] if depth is None else ["--depth", str(depth)]   # history per publisher
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "helpaware_node.ros.fleet", "--store", str(store_path),
             "--key-file", str(key_path), "--robot-id", robot_id] + extra,
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL,
            text=True, bufsize=1)
        threading.Thread(target=lambda: [self.lines.put(x.strip()) for x in self.proc.stdout],
                         daemon=True).start()

    def next_line(self, timeout_s: float):
        import queue
        try:
            return self.lines.get(timeout=timeout_s)
        except queue.Empty:
            return None

    def stop(self) -> None:
        try:
            self.proc.stdin.write("quit\n")
            self.proc.stdin.flush()
            self.proc.wait(timeout=15)
        except Exception:
            self.proc.kill()
            self.proc.wait()
