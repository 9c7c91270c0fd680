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

"""A driver node for the launch tests: shows people, opens a help need, waits for the decision.

Used from the active tests of the launch test files here, which launch_testing runs in a
thread beside the launch; so the probe has an rclpy context of its own. Every wait is bounded.
"""
from __future__ import annotations

import json
import os
import time

from helpaware_node import wire
import rclpy
from rclpy.executors import SingleThreadedExecutor
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)
VIEW = [{"id": "nurse-a", "distance_m": 2.0, "busyness": 0.1},
        {"id": "porter-b", "distance_m": 3.0, "busyness": 0.7}]


def installed_launch_file(name: str) -> str:
    """Return the launch file as installed: share/helpaware_node/launch through the ament index."""
    from ament_index_python.packages import get_package_share_directory
    return os.path.join(get_package_share_directory("helpaware_node"), "launch", name)


def described_launch(launch_file: str, arguments=None):
    """Return the installed launch file with these arguments, then ReadyToTest."""
    import launch
    from launch.actions import IncludeLaunchDescription
    from launch.launch_description_sources import PythonLaunchDescriptionSource
    import launch_testing.actions
    return launch.LaunchDescription([
        IncludeLaunchDescription(PythonLaunchDescriptionSource(installed_launch_file(launch_file)),
                                 launch_arguments=(arguments or {}).items()),
        launch_testing.actions.ReadyToTest(),
    ])


def assert_clean_shutdown(case, proc_info, proc_output) -> None:
    """Post-shutdown: every process ended with code 0 (launch sent SIGINT), no traceback."""
    import launch_testing.asserts
    launch_testing.asserts.assertExitCodes(proc_info, allowable_exit_codes=[0])
    for output in proc_output:
        case.assertNotIn("Traceback", output.text.decode(errors="replace"))


def clean_shutdown_test():
    """Return a post-shutdown TestCase for a launch test module.

    `TestShutdown = clean_shutdown_test()` (launch_testing finds post-shutdown tests among the
    module's classes).
    """
    import unittest

    import launch_testing

    @launch_testing.post_shutdown_test()
    class TestShutdown(unittest.TestCase):

        def test_sigint_stops_it_cleanly(self, proc_info, proc_output):
            assert_clean_shutdown(self, proc_info, proc_output)
    return TestShutdown


def process_environment(pid: int) -> dict:
    """Return the environment a launched process really has (Linux /proc)."""
    with open(f"/proc/{pid}/environ", "rb") as fh:
        items = [x.split(b"=", 1) for x in fh.read().split(b"\0") if b"=" in x]
    return {k.decode(): v.decode(errors="replace") for k, v in items}


class Probe:

    def __init__(self, namespace: str = "", people_topic: str = "people"):
        self.context = rclpy.Context()
        rclpy.init(context=self.context)
        self.node = rclpy.create_node("launch_probe", namespace=namespace, context=self.context)
        self.people_pub = self.node.create_publisher(String, people_topic, qos_profile_sensor_data)
        self.task_pub = self.node.create_publisher(String, "task_status", RELIABLE)
        self.outcome_pub = self.node.create_publisher(String, "outcome", RELIABLE)
        self.decisions: list[dict] = []
        self.outcomes: list[dict] = []
        self.tasks: list[dict] = []
        self.decision_sub = self.node.create_subscription(
            String, "decision", lambda m: self.decisions.append(json.loads(m.data)), RELIABLE)
        self.node.create_subscription(String, "outcome",
                                      lambda m: self.outcomes.append(json.loads(m.data)),
                                      RELIABLE)
        self.node.create_subscription(String, "task_status",
                                      lambda m: self.tasks.append(json.loads(m.data)), RELIABLE)
        self.executor = SingleThreadedExecutor(context=self.context)
        self.executor.add_node(self.node)

    def spin_until(self, predicate, timeout_s: float = 60.0) -> bool:
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            if predicate():
                return True
            self.executor.spin_once(timeout_sec=0.05)
        return bool(predicate())

    def node_names(self) -> set[str]:
        return {(ns.rstrip("/") + "/" + name) for name, ns in
                self.node.get_node_names_and_namespaces()}

    def wait_for_decider(self, full_name: str, timeout_s: float = 60.0) -> bool:
        """Until the decider exists and hears the probe's people, task_status and outcome."""
        pubs = (self.people_pub, self.task_pub, self.outcome_pub)
        return self.spin_until(lambda: full_name in self.node_names()
                               and all(p.get_subscription_count() > 0 for p in pubs)
                               and self.decision_sub.get_publisher_count() > 0, timeout_s)

    def decide(self, request_id: str, view=VIEW, kind: str = "handover",
               timeout_s: float = 60.0):
        """Show `view` (best effort, repeated), open a need, return its first decision."""
        def mine():
            return next((d for d in self.decisions if d.get("request_id") == request_id), None)
        for _ in range(5):
            self.people_pub.publish(String(data=wire.people_document(view, time.time())))
            self.spin_until(lambda: False, 0.1)
        self.task_pub.publish(String(data=wire.task_status_document(request_id, "open", kind,
                                                                    1.0)))
        deadline = time.monotonic() + timeout_s
        while mine() is None and time.monotonic() < deadline:
            self.people_pub.publish(String(data=wire.people_document(view, time.time())))
            self.spin_until(lambda: mine() is not None, 0.3)
        return mine()

    def close(self) -> None:
        self.executor.shutdown()
        self.node.destroy_node()
        rclpy.try_shutdown(context=self.context)
