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

"""Example: the behaviour-layer side.

Opens a help need when the robot is stuck, follows the decision, and resolves the need when the way
is clear (or cancels it when giving up).

Run next to the node:  ros2 run helpaware_node example_behaviour_layer --ros-args -r __ns:=/robot1
                       (venv: example_behaviour_layer --ros-args ...)
Here "stuck" is simulated by a timer: parameter `stuck_period_s` (seconds between needs, default
20.0 when run as a program; 0 opens needs only through `open_need`). A real robot calls
`open_need` from its behaviour tree (for example when a door does not open) and `resolve` once
it has passed.
"""
from __future__ import annotations

import itertools
import sys
from typing import Optional

from rclpy.node import Node
from std_msgs.msg import String

from .running import decode_or_warn, RELIABLE, spin_node
from ... import wire


class BehaviourLayer(Node):

    def __init__(self, stuck_period_s: Optional[float] = 0.0, **kwargs):
        super().__init__("behaviour_layer", **kwargs)
        period = float(self.declare_parameter(
            "stuck_period_s", 20.0 if stuck_period_s is None else float(stuck_period_s)).value)
        if not 0.0 <= period <= 86400.0:
            raise ValueError(f"stuck_period_s: {period:g} is outside the allowed range [0, 86400]")
        self.task_pub = self.create_publisher(String, "task_status", RELIABLE)
        self.create_subscription(String, "decision", self._on_decision, RELIABLE)
        self.create_subscription(String, "outcome", self._on_outcome, RELIABLE)
        self._ids = itertools.count(1)
        self.open: dict[str, str] = {}          # request id -> kind
        self.finished: dict[str, str] = {}      # request id -> how it ended
        if period > 0:
            self.create_timer(period, self._open_door_need)

    def _open_door_need(self) -> None:
        self.open_need("door")

    def open_need(self, kind: str, urgency: float = 0.0) -> str:
        rid = f"{self.get_name()}-{next(self._ids)}"
        self.open[rid] = kind
        self.get_logger().info(f"{rid}: stuck ({kind}), help need opened")
        self.task_pub.publish(String(data=wire.task_status_document(rid, "open", kind, urgency)))
        return rid

    def resolve(self, rid: str, state: str = "resolved") -> None:
        if self.open.pop(rid, None) is not None:
            self.task_pub.publish(String(data=wire.task_status_document(rid, state)))
            self.finished[rid] = state

    def _on_decision(self, msg: String) -> None:
        d = decode_or_warn(self, "decision", msg.data)
        if d is None:
            return
        if d["request_id"] not in self.open:
            return
        if d["action"] == "continue":
            # the robot carries on alone (waits for the door, takes another route...)
            self.get_logger().info(f"{d['request_id']}: carry on alone ({d['why']})")
            self.resolve(d["request_id"], "cancelled")
        else:
            self.get_logger().info(f"{d['request_id']}: asking {d['person_id']}")

    def _on_outcome(self, msg: String) -> None:
        try:
            o = wire.decode("outcome", msg.data)
        except wire.WireError:
            return
        if o["result"] == "helped":
            self.resolve(o["request_id"])      # in a real robot: once it has passed the door


def main(args=None) -> int:
    return spin_node(lambda: BehaviourLayer(stuck_period_s=None), args)


if __name__ == "__main__":
    sys.exit(main())
