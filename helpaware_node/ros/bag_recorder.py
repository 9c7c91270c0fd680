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

"""The recorder behind `helpaware record`: raw subscriptions written straight into an MCAP bag.

Messages are never deserialised by rclpy (raw=True): the bytes go into the bag as they came,
except on topics given a `transform` (the person-id hashing of `decision` and `people`).
The node's own topics are subscribed at once with the QoS of the topic contract; any other
topic once a publisher for it appears, with a QoS that fits every publisher (reliable /
transient local only if all publishers offer it), as `ros2 bag record` does.
"""
from __future__ import annotations

import importlib
import sys
import time
from typing import Any, Callable, Optional

import rclpy
from rclpy._rclpy_pybind11 import RCLError
from rclpy.executors import ExternalShutdownException, SingleThreadedExecutor
from rclpy.node import Node
from rclpy.parameter import Parameter
from rclpy.qos import DurabilityPolicy, QoSProfile, ReliabilityPolicy

from ..bag import BagWriter, normalise_type

Transform = Callable[[bytes], bytes]


def message_class(msgtype: str):
    """'std_msgs/msg/String' -> the generated Python class."""
    pkg, kind, name = normalise_type(msgtype).split("/")
    return getattr(importlib.import_module(f"{pkg}.{kind}"), name)


# The node's topic contract (docs/parameters.md, DESIGN section 5): these are subscribed at
# once, before any publisher appears, so the first messages of a run are not missed.
# people is best effort (sensor data); the rest reliable. Other topics use discovery.
CONTRACT_QOS = {
    "people": QoSProfile(depth=100, reliability=ReliabilityPolicy.BEST_EFFORT),
    "decision": QoSProfile(depth=100, reliability=ReliabilityPolicy.RELIABLE),
    "task_status": QoSProfile(depth=100, reliability=ReliabilityPolicy.RELIABLE),
    "outcome": QoSProfile(depth=100, reliability=ReliabilityPolicy.RELIABLE),
    "markers": QoSProfile(depth=100, reliability=ReliabilityPolicy.BEST_EFFORT),
    "/diagnostics": QoSProfile(depth=100, reliability=ReliabilityPolicy.BEST_EFFORT),
}


def qos_for(publishers) -> QoSProfile:
    reliable = all(p.qos_profile.reliability == ReliabilityPolicy.RELIABLE for p in publishers)
    latched = all(p.qos_profile.durability == DurabilityPolicy.TRANSIENT_LOCAL for p in publishers)
    return QoSProfile(depth=100,
                      reliability=ReliabilityPolicy.RELIABLE if reliable
                      else ReliabilityPolicy.BEST_EFFORT,
                      durability=DurabilityPolicy.TRANSIENT_LOCAL if latched
                      else DurabilityPolicy.VOLATILE)


class BagRecorder(Node):
    def __init__(self, writer: BagWriter, topics: dict[str, Optional[str]],
                 transforms: dict[str, Transform], namespace: str = "",
                 use_sim_time: bool = False) -> None:
        super().__init__("helpaware_recorder", namespace=namespace,
                         parameter_overrides=[Parameter("use_sim_time", value=use_sim_time)])
        self.writer = writer
        self.wanted = {self.resolve_topic_name(t): ty for t, ty in topics.items()}
        self.transforms = {self.resolve_topic_name(t): f for t, f in transforms.items()}
        self.subs: dict[str, Any] = {}   # topic -> subscription (None: not recorded)
        self.dropped: dict[str, int] = {}
        self.before_clock = 0
        for name, qos in CONTRACT_QOS.items():
            msgtype = topics.get(name)
            if msgtype:
                topic = self.resolve_topic_name(name)
                writer.add_topic(topic, msgtype)
                self.subs[topic] = self.create_subscription(
                    message_class(msgtype), topic, self._callback_for(topic), qos, raw=True)
        self.create_timer(0.5, self.discover)
        self.discover()

    def discover(self) -> None:
        """Subscribe to each wanted topic as soon as it has a publisher."""
        for topic, msgtype in self.wanted.items():
            if topic in self.subs:
                continue
            pubs = self.get_publishers_info_by_topic(topic)
            if not pubs:
                continue
            offered = normalise_type(pubs[0].topic_type)
            if msgtype and normalise_type(msgtype) != offered:
                self.get_logger().warning(f"{topic}: publishers offer {offered}, "
                                          f"expected {msgtype}; not recorded")
                self.subs[topic] = None
                continue
            try:
                cls = message_class(offered)
                self.writer.add_topic(topic, offered)
            except (ImportError, AttributeError, KeyError) as exc:
                self.get_logger().warning(f"{topic}: cannot record {offered} ({exc})")
                self.subs[topic] = None
                continue
            self.subs[topic] = self.create_subscription(
                cls, topic, self._callback_for(topic), qos_for(pubs), raw=True)

    def _callback_for(self, topic: str):
        transform = self.transforms.get(topic)
        writer = self.writer
        clock = self.get_clock()

        def on_message(data: bytes) -> None:
            stamp_ns = clock.now().nanoseconds
            if stamp_ns == 0:     # sim time before the first /clock: no time to file it under
                self.before_clock += 1
                return
            if transform is not None:
                try:
                    data = transform(data)
                except ValueError as exc:   # never store an untransformed message
                    self.dropped[topic] = self.dropped.get(topic, 0) + 1
                    self.get_logger().warning(f"{topic}: message not recorded ({exc})",
                                              throttle_duration_sec=5.0)
                    return
            writer.write(topic, stamp_ns, data)

        return on_message


def progress_line(counts: dict[str, int], elapsed_s: float) -> str:
    total = sum(counts.values())
    parts = ", ".join(f"{t.rsplit('/', 1)[-1]} {n}" for t, n in sorted(counts.items()))
    return f"recording {elapsed_s:6.1f} s  {total} messages  ({parts or 'waiting for publishers'})"


def record(writer: BagWriter, topics: dict[str, Optional[str]],
           transforms: dict[str, Transform], duration_s: Optional[float] = None,
           namespace: str = "", progress_every_s: float = 1.0, out=sys.stderr,
           use_sim_time: bool = False) -> dict[str, int]:
    """Record until Ctrl-C, SIGTERM or `duration_s`; the bag is always closed cleanly."""
    rclpy.init()
    node = None
    start = time.monotonic()
    tty = hasattr(out, "isatty") and out.isatty()
    try:
        # one executor for the whole recording, not one per spin_once
        executor = SingleThreadedExecutor()
        node = BagRecorder(writer, topics, transforms, namespace, use_sim_time)
        executor.add_node(node)
        last_print = 0.0
        last_flush = start
        while rclpy.ok():
            executor.spin_once(timeout_sec=0.1)
            now = time.monotonic()
            if duration_s is not None and now - start >= duration_s:
                break
            if now - last_flush >= 2.0:   # bound what a power cut could lose
                writer.flush()
                last_flush = now
            if now - last_print >= (progress_every_s if tty else 5.0 * progress_every_s):
                line = progress_line(writer.counts, now - start)
                out.write(("\r" + line) if tty else (line + "\n"))
                out.flush()
                last_print = now
    except (KeyboardInterrupt, ExternalShutdownException):
        pass
    except RCLError:
        if rclpy.ok():
            raise
        # SIGTERM/SIGINT shut the context down while the executor was waiting: a clean stop
    finally:
        writer.close()
        line = progress_line(writer.counts, time.monotonic() - start)
        out.write(("\r" if tty else "") + line + "\n")
        if node is not None:
            for topic, n in node.dropped.items():
                out.write(f"{topic}: {n} messages not recorded (could not hash person ids)\n")
            if node.before_clock:
                out.write(f"{node.before_clock} messages arrived before /clock started "
                          "(sim time) and were not recorded\n")
            node.destroy_node()
        rclpy.try_shutdown()
    return dict(writer.counts)
