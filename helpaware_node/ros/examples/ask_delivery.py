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

"""Example: the side that speaks to people.

On an `ask` decision it delivers the ask (screen, speech...) and reports what happened as an
`outcome` document.

Run next to the node:  ros2 run helpaware_node example_ask_delivery --ros-args -r __ns:=/robot1
                       (venv: example_ask_delivery --ros-args ...)
Parameter `answer` (helped, declined, no_response, could_not_ask; default helped) is the reply
this stand-in reports. A real robot shows a prompt and maps the reply (a button, speech, a
timeout) onto helped / declined / no_response, and reports could_not_ask when the prompt never
reached the person (they walked away, the screen failed).
"""
from __future__ import annotations

import sys
from typing import Callable, Optional

from rclpy.node import Node
from std_msgs.msg import String

from .running import decode_or_warn, RELIABLE, spin_node
from ... import wire

RESULTS = ("helped", "declined", "no_response", "could_not_ask")


class AskDelivery(Node):

    def __init__(self, answer_fn: Optional[Callable[[str], str]] = None, **kwargs):
        super().__init__("ask_delivery", **kwargs)
        answer: str = self.declare_parameter("answer", "helped").value
        if answer not in RESULTS:
            raise ValueError(f"answer: {answer!r} is not one of {', '.join(RESULTS)}")
        self.answer_fn = answer_fn or (lambda person_id: answer)
        self.outcome_pub = self.create_publisher(String, "outcome", RELIABLE)
        self.create_subscription(String, "decision", self._on_decision, RELIABLE)
        self.delivered: list[tuple[str, str, str]] = []

    def _on_decision(self, msg: String) -> None:
        d = decode_or_warn(self, "decision", msg.data)
        if d is None:
            return
        if d["action"] != "ask":
            return
        # deliver the ask to d["person_id"] here; then report the answer
        result = self.answer_fn(d["person_id"])
        self.delivered.append((d["request_id"], d["person_id"], result))
        self.get_logger().info(f"{d['request_id']}: asked {d['person_id']}: {result}")
        self.outcome_pub.publish(String(data=wire.outcome_document(
            d["request_id"], d["person_id"], result)))


def main(args=None) -> int:
    return spin_node(AskDelivery, args)


if __name__ == "__main__":
    sys.exit(main())
