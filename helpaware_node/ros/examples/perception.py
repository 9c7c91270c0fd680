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

"""Example: a perception stand-in. Publishes a `people` document with invented people in view.

Run next to the node:  ros2 run helpaware_node example_perception --ros-args -r __ns:=/robot1
                       (venv: example_perception --ros-args ...)
Parameters: `people`, a list of "id,distance_m,busyness,activity" strings (invented night-shift
staff by default), and `rate_hz` (default 2.0). A real robot converts its person tracker's
output into this document (docs/integration.md); the decider takes it at sensor-data QoS.
"""
from __future__ import annotations

import sys
from typing import Sequence

from rclpy.node import Node
from rclpy.qos import qos_profile_sensor_data
from std_msgs.msg import String

from .running import spin_node
from ... import wire

DEFAULT_PEOPLE = ("nurse-ward3-a,2.0,0.2,charting", "porter-b,3.5,0.1,idle",
                  "doctor-c,4.5,0.7,walking_fast")


def parse_people(entries: Sequence[str]) -> list[dict]:
    """'id,distance_m,busyness,activity' strings -> people entries; errors name the entry."""
    people = []
    for i, entry in enumerate(entries):
        fields = [f.strip() for f in str(entry).split(",")]
        if len(fields) != 4 or not fields[0]:
            raise ValueError(f"people[{i}]: {entry!r} is not 'id,distance_m,busyness,activity'")
        try:
            distance_m, busyness = float(fields[1]), float(fields[2])
        except ValueError:
            raise ValueError(f"people[{i}]: distance_m and busyness must be numbers, "
                             f"got {fields[1]!r}, {fields[2]!r}") from None
        if not 0.0 <= busyness <= 1.0 or not 0.0 <= distance_m < 1000.0:
            raise ValueError(f"people[{i}]: busyness {busyness:g} must be in [0, 1] and "
                             f"distance_m {distance_m:g} in [0, 1000)")
        person = {"id": fields[0], "distance_m": distance_m, "busyness": busyness}
        if fields[3]:
            person["activity"] = fields[3]
        people.append(person)
    return people


class PerceptionStandIn(Node):

    def __init__(self, **kwargs):
        super().__init__("example_perception", **kwargs)
        self.people = parse_people(self.declare_parameter("people", list(DEFAULT_PEOPLE)).value)
        rate_hz = float(self.declare_parameter("rate_hz", 2.0).value)
        if not 0.1 <= rate_hz <= 100.0:
            raise ValueError(f"rate_hz: {rate_hz:g} is outside the allowed range [0.1, 100]")
        self.people_pub = self.create_publisher(String, "people", qos_profile_sensor_data)
        self.create_timer(1.0 / rate_hz, self.publish_people)

    def publish_people(self) -> None:
        stamp_s = self.get_clock().now().nanoseconds * 1e-9
        if stamp_s > 0:     # sim time before the first /clock: nothing to stamp yet
            self.people_pub.publish(String(data=wire.people_document(self.people, stamp_s)))


def main(args=None) -> int:
    return spin_node(PerceptionStandIn, args)


if __name__ == "__main__":
    sys.exit(main())
