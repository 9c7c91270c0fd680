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

"""The stand-ins' shared main(): spin one node until Ctrl-C or an external shutdown."""
from __future__ import annotations

import sys
from typing import Callable, Optional

import rclpy
from rclpy.executors import ExternalShutdownException
from rclpy.node import Node
from rclpy.qos import QoSProfile, ReliabilityPolicy

from ... import wire

# the decider's QoS for task_status, outcome and decision (docs/integration.md)
RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)


def decode_or_warn(node: Node, name: str, text: str) -> Optional[dict]:
    """Return the document, or None after a warning that names what was wrong with it."""
    try:
        return wire.decode(name, text)
    except wire.WireError as exc:
        node.get_logger().warning(f"bad {name} document: {exc}")
        return None


def spin_node(make_node: Callable[[], Node], args=None) -> int:
    rclpy.init(args=args)
    node = None
    try:
        node = make_node()
        rclpy.spin(node)
    except (KeyboardInterrupt, ExternalShutdownException):
        pass
    except ValueError as exc:     # a parameter out of range: one line, no traceback
        print(f"{sys.argv[0]}: {exc}", file=sys.stderr)
        return 2
    finally:
        if node is not None:
            node.destroy_node()
        rclpy.try_shutdown()
    return 0
