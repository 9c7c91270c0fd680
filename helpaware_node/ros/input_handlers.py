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

"""The node's input topics: count, decode, hand to the help session, book what was refused.

One method per topic (people, task_status, outcome, the navigation status). A document that
is refused (a wire or core error naming its field) is counted and logged by topic and field;
one whose handling raises anything else is contained, counted apart as a handler error (a
defect to report) and as a rejection, and the robot carries on. The session's Step goes to
the node's output side (step_output.py).
"""
from __future__ import annotations

import re
import time

from std_msgs.msg import String

from .refusal_log import exception_text
from .. import wire
from ..core.model import CoreInputError
from ..session.state import MAX_GOAL_STATUSES

GOAL_STATES = {4: "succeeded", 5: "canceled", 6: "aborted"}   # action_msgs/GoalStatus codes


class InputHandlers:
    """The subscription callbacks of a HelpAwareNode (its counters, session and log)."""

    def __init__(self, node) -> None:
        self._node = node

    def people(self, msg: String) -> None:
        node = self._node
        node.counters.received["people"] += 1
        node.input_watch.note("people", time.monotonic())
        try:
            doc = wire.decode("people", msg.data)
            people = wire.people_from(doc)
            node.session.people_seen(people, node.now_s(),
                                     doc.get("frame_id", "") or "base_link")
        except (wire.WireError, CoreInputError) as exc:
            self.reject("people", str(exc))
        except Exception as exc:  # noqa: BLE001 - no document may stop the robot
            self.failed("people", exc)

    def task_status(self, msg: String) -> None:
        node = self._node
        node.counters.received["task_status"] += 1
        node.input_watch.note("task_status", time.monotonic())
        try:
            doc = wire.decode("task_status", msg.data)
            if doc["state"] == "open":
                now = node._read_clock()
                step = node.session.need_opened(wire.help_need_from(doc, now), now)
            else:
                step = node.session.need_closed(doc["request_id"], doc["state"])
            node._apply(step)
        except (wire.WireError, CoreInputError) as exc:
            self.reject("task_status", str(exc))
        except Exception as exc:  # noqa: BLE001 - no document may stop the robot
            self.failed("task_status", exc)

    def outcome(self, msg: String) -> None:
        node = self._node
        node.counters.received["outcome"] += 1
        try:
            doc = wire.decode("outcome", msg.data)
            step = node.session.outcome(doc["request_id"], doc["person_id"], doc["result"],
                                        node._read_clock())
            node._apply(step)
        except (wire.WireError, CoreInputError) as exc:
            self.reject("outcome", str(exc))
        except Exception as exc:  # noqa: BLE001 - no document may stop the robot
            self.failed("outcome", exc)

    def navigation_status(self, msg) -> None:
        """Take a navigation status array.

        Its last MAX_GOAL_STATUSES entries, at most one new need (from its newest aborted goal), so
        any array takes bounded time (session.navigation_status).
        """
        node = self._node
        node.counters.received["navigation_status"] += 1
        try:
            entries = msg.status_list
            node.counters.statuses_skipped += max(len(entries) - MAX_GOAL_STATUSES, 0)
            goals = [(bytes(st.goal_info.goal_id.uuid).hex(), GOAL_STATES.get(st.status, ""),
                      st.goal_info.stamp.sec + st.goal_info.stamp.nanosec * 1e-9)
                     for st in entries[-MAX_GOAL_STATUSES:]]
            node._apply(node.session.navigation_status(goals, node._read_clock()))
        except CoreInputError as exc:
            self.reject("navigation_status", str(exc))
        except Exception as exc:  # noqa: BLE001 - no message may stop the robot
            self.failed("navigation_status", exc)

    def reject(self, topic: str, reason: str) -> None:
        """Count and log a refused document.

        One line per topic and field at once, then at most one a minute with the number since
        (every count is in /diagnostics).
        """
        node = self._node
        node.counters.reject(topic, reason)
        field = re.sub(r"\[\d+\]", "[]", reason.partition(":")[0])[:60]
        text = node.log_lines.due(f"rejected.{topic}.{field}",
                                  f"rejected {topic}: {reason[:200]}")
        if text is not None:
            node.get_logger().warning(text)

    def failed(self, topic: str, exc: BaseException) -> None:
        """Count and log a document whose handling raised something that is not a refusal.

        Contained, counted apart (a defect to report) and as a rejection; the robot carries on.
        """
        self._node.counters.failed[topic] += 1
        self.reject(topic, f"document: could not be handled ({exception_text(exc)})")
