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

"""The node's output side: what a Step of the help session becomes.

Its decisions are published as `decision` documents (and noted for the markers), the events it
stored are shared on the fleet topic (only once durable: the session stores them first), and
its notes go to the log, bounded by kind (refusal_log.LogThrottle).
"""
from __future__ import annotations

from typing import Optional

from std_msgs.msg import String

from .. import wire
from ..session import Step


class StepOutput:
    """Publishes, shares and logs the Steps of a HelpAwareNode's session."""

    def __init__(self, node) -> None:
        self._node = node
        self.published = 0                       # decision documents sent since start
        self.last_decision: Optional[dict] = None

    def apply(self, step: Step) -> None:
        """Publish the step's decisions, share what it stored, log its notes."""
        node = self._node
        robot_id = getattr(node.store, "robot_id", "")
        model, config, source = node.session.model, node.params.config, node.constants_source
        for out in step.decisions:
            # parameters are spliced into the text from a cache (fast_text), not built per
            # decision; the values come from validated core values, so no second check
            doc = wire.decision_to_document(out.decision, out.robot_ask_times_s, None, None,
                                            robot_id, check=False)
            text = wire.fast_text(doc, model, config, source,
                                  finite=wire.evaluation_is_finite(out.decision))
            node.decision_pub.publish(String(data=text))
            self.published += 1
            node.markers.note_decision(out.decision)
            self.last_decision = doc
        for event in step.share:
            node.fleet.publish(event)     # stored here first: shared only once durable
        for note in step.notes:           # by kind, bounded: a document may cause a note
            line = node.log_lines.due(note.kind or note.level, note.text,
                                      note.throttle_s or None)
            if line is None:
                continue
            if note.level == "error":     # one call site per severity (rclpy's rule)
                node.get_logger().error(line)
            elif note.level == "warning":
                node.get_logger().warning(line)
            else:
                node.get_logger().info(line)
