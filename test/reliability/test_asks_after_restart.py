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

"""The hard limits hold across a SIGKILL and a restart, and across robots of one site.

Node processes are started as users start them (ros/launch_config.py through process_rig),
on an SQLite store in tmp_path; the test process drives them over their topics. What the
store holds is read with the sqlite3 module read-only (process_rig.stored_asks), not through
the store's own code. Each check reads the reason code from the decision document's
rationale, as a user reviewing a bag would.

The two-robot test runs the robots in two namespaces (/siteA, /siteB) on the site-wide fleet
topic (/helpaware/fleet, the default, process_rig.SHARED_FLEET_TOPIC); the single-robot tests
give each robot a fleet topic of its own (process_rig.own_fleet_topic).
"""
import random

import pytest

pytest.importorskip("rclpy")

# I100: these come after pytest.importorskip("rclpy"), so after the pytest import
from helpaware_node.store.base import person_key  # noqa: E402,I100
from process_rig import (  # noqa: E402
    Drive,
    Every,
    kill_hard,
    own_fleet_topic,
    Robot,
    SHARED_FLEET_TOPIC,
    SITE_KEY,
    start_node,
    stop_gently,
    stored_asks,
    write_site_key,
)

pytestmark = pytest.mark.ros

NURSE = {"id": "nurse-a", "distance_m": 1.0, "busyness": 0.0}
PORTER = {"id": "porter-b", "distance_m": 2.0, "busyness": 0.0}
# asking pays (no interruption cost); the re-ask interval is the limit under test
REASK_LIMITS = {"min_reask_interval_s": 900.0, "max_asks_per_person_per_day": 3,
                "max_asks_per_hour": 100, "interruption_weight_s": 0.0}


def excluded(decision: dict) -> dict[str, str]:
    return {r["person_id"]: r["excluded"] for r in decision["rationale"]}


def key_of(person: dict) -> str:
    return person_key(SITE_KEY, person["id"])


def test_sigkill_after_a_decline_and_after_an_unanswered_ask_keeps_the_reask_interval(tmp_path):
    write_site_key(tmp_path)
    store, log = tmp_path / "beliefs.sqlite3", tmp_path / "node.log"
    drive = Drive("reask_driver")
    robot = drive.add(Robot("rk1", "/reask", own_fleet_topic("/reask"), [NURSE],
                            random.Random(1)))
    proc = start_node(store, "rk1", "/reask", log, limits=REASK_LIMITS)
    try:
        # 1. nurse-a asked, she declines; SIGKILL right after the node stored the decline
        d = drive.probe(robot)
        assert (d["action"], d["person_id"]) == ("ask", "nurse-a"), d["why"]
        assert drive.answer_until_acked(robot, d, set(robot.acked), 30.0, result="declined")
        kill_hard(proc)
        assert [k for _, k, _ in stored_asks(store)] == [key_of(NURSE)]   # durable before
        proc = start_node(store, "rk1", "/reask", log, limits=REASK_LIMITS)
        after = drive.probe(robot)
        assert after["action"] == "continue", log.read_text()[-1500:]
        assert excluded(after) == {"nurse-a": "reask_interval"}
        assert after["candidates"][0]["ask_times_s"] == [stored_asks(store)[0][2]]
        drive.resolve_open(robot)

        # 2. porter-b comes along and is asked; SIGKILL before any outcome
        robot.people = [NURSE, PORTER]
        d = drive.probe(robot)
        assert (d["action"], d["person_id"]) == ("ask", "porter-b"), d["why"]
        kill_hard(proc)
        assert key_of(PORTER) in {k for _, k, _ in stored_asks(store)}
        proc = start_node(store, "rk1", "/reask", log, limits=REASK_LIMITS)
        after = drive.probe(robot)
        assert after["action"] == "continue"
        assert excluded(after) == {"nurse-a": "reask_interval", "porter-b": "reask_interval"}
    finally:
        stop_gently(proc)
        drive.close()


def test_the_hourly_cap_counts_the_asks_made_before_a_sigkill(tmp_path):
    limits = {"min_reask_interval_s": 0.0, "max_asks_per_person_per_day": 100,
              "max_asks_per_hour": 2, "interruption_weight_s": 0.0}
    people = [NURSE, PORTER, {"id": "clerk-c", "distance_m": 3.0, "busyness": 0.0}]
    write_site_key(tmp_path)
    store, log = tmp_path / "beliefs.sqlite3", tmp_path / "node.log"
    drive = Drive("hourly_driver")
    robot = drive.add(Robot("rh1", "/hourly", own_fleet_topic("/hourly"), people,
                            random.Random(2)))
    proc = start_node(store, "rh1", "/hourly", log, limits=limits)
    try:
        for _ in range(2):
            d = drive.probe(robot)
            assert d["action"] == "ask", d["why"]
            assert drive.answer_until_acked(robot, d, set(robot.acked), 30.0, result="helped")
            drive.resolve_open(robot)
        kill_hard(proc)
        assert len(stored_asks(store)) == 2
        proc = start_node(store, "rh1", "/hourly", log, limits=limits)
        after = drive.probe(robot)
        assert after["action"] == "continue", log.read_text()[-1500:]
        assert set(excluded(after).values()) == {"robot_hourly_cap"}
        assert len(after["robot_ask_times_s"]) == 2            # loaded from the store
        assert len(stored_asks(store)) == 2                    # and no third ask was made
    finally:
        stop_gently(proc)
        drive.close()


def test_a_peers_ask_excludes_the_person_site_wide_unless_count_peer_asks_is_off(tmp_path):
    write_site_key(tmp_path)                 # one site key for both robots (one directory)
    store_a, store_b = tmp_path / "a.sqlite3", tmp_path / "b.sqlite3"
    log_a, log_b = tmp_path / "a.log", tmp_path / "b.log"
    drive = Drive("site_driver")
    robot_a = drive.add(Robot("wardA", "/siteA", SHARED_FLEET_TOPIC, [NURSE], random.Random(3)))
    robot_b = drive.add(Robot("wardB", "/siteB", SHARED_FLEET_TOPIC, [NURSE], random.Random(4)))
    proc_a = start_node(store_a, "wardA", "/siteA", log_a, shared_fleet=True,
                        limits=REASK_LIMITS)
    proc_b = start_node(store_b, "wardB", "/siteB", log_b, shared_fleet=True,
                        limits=REASK_LIMITS)
    try:
        d = drive.probe(robot_a)
        assert (d["action"], d["person_id"]) == ("ask", "nurse-a"), d["why"]
        # robot B has robot A's ask in its store (shared on the fleet topic)
        assert drive.spin_until(Every(lambda: any(
            eid.startswith("wardA/") and k == key_of(NURSE) for eid, k, _ in
            stored_asks(store_b))), 60.0), log_b.read_text()[-1500:]
        d_b = drive.probe(robot_b)
        assert d_b["action"] == "continue"
        assert excluded(d_b) == {"nurse-a": "reask_interval"}
        asked_at = next(t for eid, _, t in stored_asks(store_b) if eid.startswith("wardA/"))
        assert d_b["candidates"][0]["ask_times_s"] == [asked_at]
        drive.resolve_open(robot_b)

        # the same robot B, with count_peer_asks off: only its own asks count
        stop_gently(proc_b)
        proc_b = start_node(store_b, "wardB", "/siteB", log_b, shared_fleet=True,
                            limits=dict(REASK_LIMITS, count_peer_asks=False))
        d_b = drive.probe(robot_b)
        assert (d_b["action"], d_b["person_id"]) == ("ask", "nurse-a"), d_b["why"]
        assert excluded(d_b) == {"nurse-a": None}
        assert d_b["candidates"][0]["ask_times_s"] == []
    finally:
        stop_gently(proc_a)
        stop_gently(proc_b)
        drive.close()
