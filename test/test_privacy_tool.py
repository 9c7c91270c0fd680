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

"""`helpaware privacy opt-out` reaches every robot of the site.

Two decision-node processes in their own namespaces (/robotA, /robotB, no remapping) apply it and
answer, and a third robot started afterwards gets it from their answers on the fleet topic and does
not ask the person.

Checks against outside sources: the person key is computed here with Python's hmac; each
store's opt-out list is read with the sqlite3 module (read-only), not through the store class.
"""
import hashlib
import hmac
import os
import sqlite3
import subprocess
import sys
import time

import pytest

rclpy = pytest.importorskip("rclpy")
# I100: these come after pytest.importorskip("rclpy"), so after the pytest import
from helpaware_node import wire  # noqa: E402,I100
from helpaware_node.ros import launch_config  # noqa: E402
from rclpy.context import Context  # noqa: E402
from rclpy.executors import SingleThreadedExecutor  # noqa: E402
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy  # noqa: E402
from site_keys import write_site_key  # noqa: E402
from std_msgs.msg import String  # noqa: E402

pytestmark = pytest.mark.ros

SITE_KEY = bytes(range(20, 52))
PERSON = "nurse-ingrid-olsen"
RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)


def start_robot(tmp_path, name):
    log = open(tmp_path / f"{name}.log", "w")
    try:
        return launch_config.start(stdout=log, stderr=subprocess.STDOUT, namespace=f"/{name}",
                                   overrides={"store_path": str(tmp_path / f"{name}.sqlite3"),
                                              "robot_id": name})
    finally:
        log.close()


def opted_out(path) -> set:
    if not os.path.exists(path):
        return set()
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=10.0)
    try:
        return {r[0] for r in conn.execute("SELECT person_key FROM opt_out")}
    except sqlite3.OperationalError:       # not created yet
        return set()
    finally:
        conn.close()


def wait_for(predicate, timeout_s):
    end = time.monotonic() + timeout_s
    while time.monotonic() < end:
        if predicate():
            return True
        time.sleep(0.2)
    return predicate()


def test_an_opt_out_sent_with_the_tool_reaches_robots_in_other_namespaces(tmp_path):
    key_file = write_site_key(tmp_path, SITE_KEY)
    key = hmac.new(SITE_KEY, PERSON.encode(), hashlib.sha256).hexdigest()
    procs = [start_robot(tmp_path, "robotA"), start_robot(tmp_path, "robotB")]
    ctx = Context()
    rclpy.init(context=ctx)
    node = rclpy.create_node("privacy_tool_driver", context=ctx)
    executor = SingleThreadedExecutor(context=ctx)
    executor.add_node(node)
    try:
        tool = subprocess.run(
            [sys.executable, "-m", "helpaware_node.cli", "privacy", "--key-file", str(key_file),
             "opt-out", "--person", PERSON, "--robots", "2", "--wait-s", "90"],
            capture_output=True, text=True, timeout=240)
        print("\n" + tool.stdout + tool.stderr)
        assert tool.returncode == 0, tool.stdout + tool.stderr
        assert "applied by robotA" in tool.stdout and "applied by robotB" in tool.stdout
        assert "2 of 2 robot(s) answered" in tool.stdout
        assert PERSON not in tool.stdout               # only the key prefix is printed
        for name in ("robotA", "robotB"):
            assert wait_for(lambda: key in opted_out(tmp_path / f"{name}.sqlite3"), 30.0), name

        # a robot started afterwards learns it from the others' answers (transient local)
        procs.append(start_robot(tmp_path, "robotC"))
        assert wait_for(lambda: key in opted_out(tmp_path / "robotC.sqlite3"), 90.0)
        # ... and does not ask the person
        people = node.create_publisher(String, "/robotC/people", qos_profile_sensor_data)
        task = node.create_publisher(String, "/robotC/task_status", RELIABLE)
        decisions = []
        node.create_subscription(String, "/robotC/decision",
                                 lambda m: decisions.append(wire.decode("decision", m.data)),
                                 RELIABLE)
        end = time.monotonic() + 60.0
        mine = []
        n = 0
        while time.monotonic() < end and not mine:
            now = node.get_clock().now().nanoseconds * 1e-9
            people.publish(String(data=wire.people_document(
                [{"id": PERSON, "distance_m": 1.0, "busyness": 0.0}], now)))
            n += 1
            task.publish(String(data=wire.task_status_document(f"c-{n}", "open", "handover",
                                                               urgency=1.0)))
            stop = time.monotonic() + 0.5
            while time.monotonic() < stop:
                executor.spin_once(timeout_sec=0.05)
            mine = [d for d in decisions if any(r["person_id"] == PERSON
                                                for r in d["rationale"])]
        assert mine, "robotC never decided with the person in view"
        why = [r for r in mine[0]["rationale"] if r["person_id"] == PERSON][0]
        assert mine[0]["action"] == "continue" and why["excluded"] == "opted_out"
    finally:
        for p in procs:
            launch_config.stop(p, timeout_s=15)
        executor.shutdown(timeout_sec=1.0)
        node.destroy_node()
        rclpy.try_shutdown(context=ctx)
