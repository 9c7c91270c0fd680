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

"""Message types of the node's topics in rosbag2, and the std_msgs/String CDR fast path."""
from __future__ import annotations

import struct
from typing import Literal, Optional

from rosbags.typesys import get_typestore, Stores

STRING_TYPE = "std_msgs/msg/String"
MARKER_ARRAY_TYPE = "visualization_msgs/msg/MarkerArray"
DIAGNOSTIC_ARRAY_TYPE = "diagnostic_msgs/msg/DiagnosticArray"
GOAL_STATUS_ARRAY_TYPE = "action_msgs/msg/GoalStatusArray"
KNOWN_TYPES = (STRING_TYPE, MARKER_ARRAY_TYPE, DIAGNOSTIC_ARRAY_TYPE, GOAL_STATUS_ARRAY_TYPE)
BAG_FORMAT_VERSION: Literal[9] = 9

_TYPESTORE = None


class BagReadError(RuntimeError):
    """A bag could not be read to its end; says which file and how far reading got."""

    def __init__(self, path: str, reason: str, messages_read: int = 0,
                 bytes_read: Optional[int] = None, last_time_ns: Optional[int] = None) -> None:
        self.path = str(path)
        self.reason = reason
        self.messages_read = messages_read
        self.bytes_read = bytes_read
        self.last_time_ns = last_time_ns
        where = f"{messages_read} messages read"
        if bytes_read is not None:
            where += f", {bytes_read} bytes"
        if last_time_ns is not None:
            where += f", last message at {last_time_ns / 1e9:.3f} s"
        super().__init__(f"{self.path}: {reason} ({where})")


def typestore():
    """Return the ROS 2 message definitions of the 'kilted' set.

    ROS 2 message definitions (the 'kilted' set; String, MarkerArray, ... are identical across
    current distributions, so their type hashes match what the node publishes).
    """
    global _TYPESTORE
    if _TYPESTORE is None:
        _TYPESTORE = get_typestore(Stores.ROS2_KILTED)
    return _TYPESTORE


def normalise_type(msgtype: str) -> str:
    """'std_msgs/String' -> 'std_msgs/msg/String' (names as rosbag2 stores them)."""
    parts = msgtype.split("/")
    if len(parts) == 2:
        return f"{parts[0]}/msg/{parts[1]}"
    return msgtype


# ---------------------------------------------------------------- std_msgs/String (CDR) fast path

def serialize_string(text: str) -> bytes:
    """CDR (little endian) bytes of a std_msgs/String, as ROS 2 puts them on the wire."""
    raw = text.encode("utf-8") + b"\x00"
    return b"\x00\x01\x00\x00" + struct.pack("<I", len(raw)) + raw


def deserialize_string(data: bytes | memoryview) -> str:
    """Return the text of a CDR-serialised std_msgs/String (either byte order)."""
    if len(data) < 8:
        raise ValueError(f"{len(data)} bytes is too short for a std_msgs/String")
    little = data[1] == 1
    (n,) = struct.unpack_from("<I" if little else ">I", data, 4)
    if n == 0 or 8 + n > len(data):
        raise ValueError(f"std_msgs/String length {n} does not fit in {len(data)} bytes")
    return bytes(data[8:8 + n - 1]).decode("utf-8")
