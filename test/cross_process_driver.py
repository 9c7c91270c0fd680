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

"""Second process of test_launch: publishes people, help needs and outcomes; prints decisions.

Usage: python cross_process_driver.py <people topic> <namespace> ; prints one JSON line per
decision and a final {"done": ...} line.  Everything is bounded by deadlines.
"""
import json
import sys
import time

from helpaware_node import wire
import rclpy
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)


def main():
    people_topic = sys.argv[1]
    rclpy.init()
    node = rclpy.create_node("cross_driver", namespace=sys.argv[2])
    people = node.create_publisher(String, people_topic, qos_profile_sensor_data)
    tasks = node.create_publisher(String, "task_status", RELIABLE)
    outcomes = node.create_publisher(String, "outcome", RELIABLE)
    decisions = []
    decision_sub = node.create_subscription(
        String, "decision", lambda m: decisions.append(json.loads(m.data)), RELIABLE)

    def spin_until(pred, timeout_s):
        end = time.monotonic() + timeout_s
        while time.monotonic() < end and not pred():
            rclpy.spin_once(node, timeout_sec=0.05)
        return pred()

    ok = spin_until(lambda: (people.get_subscription_count() and tasks.get_subscription_count()
                             and outcomes.get_subscription_count()
                             and decision_sub.get_publisher_count()), 60)
    view = [{"id": "nurse-a", "distance_m": 2.0, "busyness": 0.1},
            {"id": "porter-b", "distance_m": 3.0, "busyness": 0.7}]
    for _ in range(8):   # best-effort topic: let the first few get through before any need
        people.publish(String(data=wire.people_document(view, time.time())))
        spin_until(lambda: False, 0.2)
    for step in range(3):
        rid = f"x{step}"

        def want():
            return any(d["request_id"] == rid for d in decisions)
        t_end = time.monotonic() + 60
        sent_need = False
        while not want() and time.monotonic() < t_end:
            people.publish(String(data=wire.people_document(view, time.time())))
            spin_until(lambda: False, 0.2)
            if not sent_need:
                tasks.publish(String(data=wire.task_status_document(rid, "open", "handover", 1.0)))
                sent_need = True
            spin_until(want, 0.5)
        d = next((d for d in decisions if d["request_id"] == rid), None)
        if d is None:
            break
        print(json.dumps(d), flush=True)
        if d["action"] == "ask":
            outcomes.publish(String(data=wire.outcome_document(rid, d["person_id"], "declined")))
            spin_until(lambda: any(x["request_id"] == rid and x is not d for x in decisions), 3)
        tasks.publish(String(data=wire.task_status_document(rid, "resolved")))
    print(json.dumps({"done": True, "connected": bool(ok)}), flush=True)
    node.destroy_node()
    rclpy.try_shutdown()


if __name__ == "__main__":
    main()
