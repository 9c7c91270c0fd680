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

"""The node's ROS entities: made at configure, destroyed at cleanup and shutdown.

Topics and QoS (relative names, so namespaces and remaps work):
  in  people       sensor-data QoS (best effort, depth 5)
  in  task_status, outcome   reliable, depth INPUT_QUEUE
  in  <navigation_status_topic> depth 10 (when the parameter is set)
  out decision     reliable, depth 50; markers and /diagnostics depth 10
Two timers on the steady clock (status, housekeeping), the guard condition the store jobs'
worker triggers, the fleet link and the privacy requests on their site-wide topics.
"""
from __future__ import annotations

import functools
import time
from typing import Any

from rclpy.clock import Clock, ClockType
from rclpy.qos import qos_profile_sensor_data, QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

from . import diagnostics as diag
from .fleet import FleetLink, PrivacyRequests
from ..store.jobs import StoreJobs

RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)
# inputs that must not be lost in a burst while a long callback holds the executor: a
# KEEP_LAST reader overwrites the oldest unread message silently (depth is not part of QoS
# matching, so publishers with any depth still connect)
INPUT_QUEUE = QoSProfile(depth=1000, reliability=ReliabilityPolicy.RELIABLE)
HOUSEKEEPING_PERIOD_S = 0.5


def _on_qos_incompatible(node, event) -> None:
    node.counters.qos_incompatible += 1
    node.get_logger().warning(f"incompatible QoS: {event}", throttle_duration_sec=5.0)


def create_entities(node, s, entities: list[Any]) -> None:
    """Create publishers, subscriptions, timers, fleet link and privacy requests.

    Sets them on the node (decision_pub, marker_pub, diag_pub, input_watch, store_jobs, fleet,
    privacy) and adds each to `entities` as it is made, so a failure part way leaves there
    what destroy_entities must remove.
    """
    from rclpy.event_handler import PublisherEventCallbacks, SubscriptionEventCallbacks
    on_qos = functools.partial(_on_qos_incompatible, node)
    sub_events = SubscriptionEventCallbacks(incompatible_qos=on_qos)
    pub_events = PublisherEventCallbacks(incompatible_qos=on_qos)
    node.decision_pub = node.create_publisher(String, "decision", RELIABLE,
                                              event_callbacks=pub_events)
    from diagnostic_msgs.msg import DiagnosticArray
    from visualization_msgs.msg import MarkerArray
    node.marker_pub = node.create_publisher(MarkerArray, "markers", 10)
    node.diag_pub = node.create_publisher(DiagnosticArray, "/diagnostics", 10)
    subs = [
        node.create_subscription(String, "people", node._on_people, qos_profile_sensor_data,
                                 event_callbacks=sub_events),
        node.create_subscription(String, "task_status", node._on_task_status, INPUT_QUEUE,
                                 event_callbacks=sub_events),
        node.create_subscription(String, "outcome", node._on_outcome, INPUT_QUEUE,
                                 event_callbacks=sub_events),
    ]
    if s.navigation_status_topic:
        from action_msgs.msg import GoalStatusArray
        subs.append(node.create_subscription(GoalStatusArray, s.navigation_status_topic,
                                             node._on_navigation_status, 10,
                                             event_callbacks=sub_events))
    node.input_watch = diag.WatchedInputs(      # the input watchdog: silent topics
        {"people": subs[0], "task_status": subs[1]}, node.get_logger(), time.monotonic())
    # cadence on the steady clock: with use_sim_time a held /clock must not stop the
    # housekeeping (a need that came before the first /clock decides once it arrives)
    steady = Clock(clock_type=ClockType.STEADY_TIME)
    timers = [node.create_timer(s.diagnostics_period_s, node._publish_status, clock=steady),
              node.create_timer(HOUSEKEEPING_PERIOD_S, node._housekeeping, clock=steady)]
    entities.extend(subs + timers + [node.decision_pub, node.marker_pub, node.diag_pub])
    # forgets, opt-outs and compactions write their rows on a worker thread (store/jobs.py;
    # a forget on a store of a million events takes seconds): in force in memory at once,
    # reported back here by a guard condition the worker triggers
    wake = node.create_guard_condition(node._on_store_jobs)
    node.store_jobs = StoreJobs(node.store, wake=wake.trigger)
    entities.append(wake)
    # signed fleet documents in and out (outcomes and asks) and live opt-out/forget on the
    # site-wide topics from parameters (docs/store.md, docs/security.md)
    node.fleet = FleetLink(node, node.store, append_many=node.session.peer_events,
                           on_forgotten=node.session.forgotten, topic=s.fleet_topic,
                           jobs=node.store_jobs)
    node.privacy = PrivacyRequests(node, node.store, node.fleet, lambda action, key: (
        node.session.forgotten(key) if action == "forget" else None),
        topic=s.privacy_topic, allow_unsigned=s.allow_unsigned_privacy_requests)
    entities.extend(node.fleet.entities + [node.privacy._sub])


def destroy_entities(node, entities: list[Any]) -> None:
    """Destroy what create_entities made, each by its kind (some are already gone at shutdown)."""
    for e in entities:
        try:
            if hasattr(e, "trigger"):
                node.destroy_guard_condition(e)
            elif hasattr(e, "cancel"):
                node.destroy_timer(e)
            elif hasattr(e, "publish"):
                node.destroy_publisher(e)
            else:
                node.destroy_subscription(e)
        except Exception:  # already gone at shutdown
            pass
