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

"""Shared helpers for the in-process node tests: a context, a driver node, bounded spinning."""
from __future__ import annotations

import time

from helpaware_node import wire
from helpaware_node.ros.node import HelpAwareNode
import rclpy
from rclpy.executors import SingleThreadedExecutor
from rclpy.parameter import Parameter
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)


def overrides(**values):
    return [Parameter(k.replace("__", "."), value=v) for k, v in values.items()]


class Rig:
    """One node under test plus a driver node publishing its inputs, in one executor."""

    def __init__(self, context, namespace="", **params):
        self.context = context
        self.node = HelpAwareNode(context=context, namespace=namespace,
                                  parameter_overrides=overrides(**params))
        self.driver = rclpy.create_node("driver", namespace=namespace, context=context)
        self.people_pub = self.driver.create_publisher(String, "people", qos_profile_sensor_data)
        self.task_pub = self.driver.create_publisher(String, "task_status", RELIABLE)
        self.outcome_pub = self.driver.create_publisher(String, "outcome", RELIABLE)
        self.decisions = []
        self.diagnostics = []
        self.decision_sub = self.driver.create_subscription(
            String, "decision", lambda m: self.decisions.append(wire.decode("decision", m.data)),
            RELIABLE)
        from diagnostic_msgs.msg import DiagnosticArray
        self.driver.create_subscription(DiagnosticArray, "/diagnostics",
                                        lambda m: self.diagnostics.append(m), 10)
        self.executor = SingleThreadedExecutor(context=context)
        self.executor.add_node(self.node)
        self.executor.add_node(self.driver)

    def spin_until(self, predicate, timeout_s=30.0):
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            if predicate():
                return True
            self.executor.spin_once(timeout_sec=0.05)
        return predicate()

    def connected(self, timeout_s=30.0):
        pubs = (self.people_pub, self.task_pub, self.outcome_pub)
        return self.spin_until(lambda: all(p.get_subscription_count() > 0 for p in pubs)
                               and self.decision_sub.get_publisher_count() > 0, timeout_s)

    def show_people(self, people):
        """Publish until the node holds every listed person (best-effort topic)."""
        text = wire.people_document(people, self.node.now_s())
        ids = {p["id"] for p in people}

        def seen():
            seen = self.node.session.seen
            return ids <= set(seen) and all(
                seen[p["id"]].person.distance_m == p["distance_m"] for p in people)
        for _ in range(100):
            self.people_pub.publish(String(data=text))
            if self.spin_until(seen, 0.3):
                return True
        return False

    def open_need(self, request_id, kind="door", **kw):
        n = len(self.decisions)
        self.task_pub.publish(String(data=wire.task_status_document(request_id, "open", kind,
                                                                    **kw)))

        def mine():
            return [d for d in self.decisions[n:] if d["request_id"] == request_id]

        assert self.spin_until(lambda: bool(mine())), "no decision arrived"
        return mine()[0]

    def report(self, request_id, person_id, result):
        n = self.node.counters.received["outcome"]
        self.outcome_pub.publish(String(data=wire.outcome_document(request_id, person_id, result)))
        assert self.spin_until(lambda: self.node.counters.received["outcome"] > n)

    def send_privacy(self, action, person_id):
        """Send a signed opt_out or forget request for a perceived id.

        A signed opt_out or forget request for a perceived id, as `helpaware privacy` sends it
        (signed with the node's own site key file).
        """
        from helpaware_node.fleet_documents import encode_document, PrivacyAct
        from helpaware_node.ros.privacy import PRIVACY_QOS
        if getattr(self, "_privacy_pub", None) is None:
            self._privacy_pub = self.driver.create_publisher(String, self.node.privacy.topic,
                                                             PRIVACY_QOS)
            assert self.spin_until(lambda: self._privacy_pub.get_subscription_count() > 0)
        act = PrivacyAct.new(action, self.node.store.key_for(person_id), "console@test")
        self._privacy_pub.publish(String(data=encode_document(action, act, self.node.fleet.keys)))
        return act

    def close(self):
        self.executor.shutdown()
        self.node.destroy_node()
        self.driver.destroy_node()
