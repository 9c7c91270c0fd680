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

"""The node's periodic status: /diagnostics (with the input watchdog) and the person markers.

Published on the diagnostics period while the node is active. Every value reported is gathered
in diagnostics.decision_values; the level says the store's state, new refusals (own inputs and
the fleet and privacy topics), incompatible QoS, outcomes held back and silent inputs. Markers
are built only while someone subscribes to them (a display topic).
"""
from __future__ import annotations

import time

from . import diagnostics as diag
from ..core import belief_at, PersonRecord


class StatusPublisher:
    """The status timer's work for a HelpAwareNode: diagnostics, then markers."""

    def __init__(self, node) -> None:
        self._node = node

    def publish(self) -> None:
        node = self._node
        if not node._active:
            return
        stamp = node.get_clock().now().to_msg()
        self.publish_markers(stamp)
        rates = node.counters.rates_since_tick(node.params.settings.diagnostics_period_s)
        # every value reported is gathered here (diagnostics.decision_values)
        values = diag.decision_values(node, rates)
        new_rej = (node.counters.new_rejections_since_tick()
                   + node.side_refusals.new_since_tick(node))
        level, message = diag.level_for(new_rej, node.counters.qos_incompatible,
                                        node.session.status.ok)
        waiting = node.held.waiting if node.held is not None else 0
        if waiting:
            message = (f"store refuses writes: asking paused, {waiting} outcome(s) "
                       f"held in memory ({node.session.status.error})")[:250]
        level, message = node.input_watch.report(   # the input watchdog: silent topics
            time.monotonic(), diag.silence_limits_s(node.params.settings), values, level, message)
        node.diag_pub.publish(diag.status_array(f"{node.get_name()}: decision",
                                                node.get_fully_qualified_name(), stamp, values,
                                                level, message))

    def publish_markers(self, stamp) -> None:
        node = self._node
        session = node.session
        if node.marker_pub.get_subscription_count() == 0:
            node.markers.reset(session.seen)   # a display topic: nobody shows it
            return
        model, now = session.model, node.now_s()
        memory = session.memory
        lifetime = max(2.0 * node.params.settings.diagnostics_period_s, 1.0)
        arr = node.markers.update(session.seen, lambda key: belief_at(
            memory.held(key) or PersonRecord.new(model), now, model).mean, stamp, lifetime)
        if arr is not None:
            node.marker_pub.publish(arr)
