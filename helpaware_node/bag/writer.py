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

"""Writing rosbag2 bags.

Always MCAP storage, rosbag2 format version 9, with the ROS 2 message definition and type hash of
every topic, so `ros2 bag info/play` and any rosbag2 reader accept the bag.
"""
from __future__ import annotations

import os
from pathlib import Path
from typing import Optional

from rosbags.interfaces import Connection
from rosbags.rosbag2 import Writer
from rosbags.rosbag2.enums import StoragePlugin

from .types import BAG_FORMAT_VERSION, normalise_type, serialize_string, STRING_TYPE, typestore


class BagWriter:
    """Writes raw (already serialised) messages into a new MCAP bag.

    Use as a context manager or call close(); close() writes metadata.yaml and the MCAP
    summary, so the bag is complete even when recording stops by a signal.
    """

    def __init__(self, path: str | os.PathLike, custom_data: Optional[dict] = None) -> None:
        self.path = Path(path)
        self._writer = Writer(self.path, version=BAG_FORMAT_VERSION,   # a Literal in rosbags
                              storage_plugin=StoragePlugin.MCAP)
        for key, value in (custom_data or {}).items():
            self._writer.set_custom_data(key, str(value))
        self._writer.open()
        self._connections: dict[str, Connection] = {}
        self.counts: dict[str, int] = {}
        self._closed = False

    def add_topic(self, topic: str, msgtype: str, msgdef: Optional[str] = None,
                  type_hash: Optional[str] = None, offered_qos_profiles=()) -> None:
        """Register a topic; the definition comes from our typestore unless given."""
        msgtype = normalise_type(msgtype)
        if topic in self._connections:
            return
        if msgdef is None:
            store = typestore()
            if msgtype not in store.types:
                raise KeyError(f"{topic}: no message definition known for {msgtype}")
            conn = self._writer.add_connection(topic, msgtype, typestore=store,
                                               offered_qos_profiles=offered_qos_profiles)
        else:
            conn = self._writer.add_connection(topic, msgtype, msgdef=msgdef, rihs01=type_hash,
                                               offered_qos_profiles=offered_qos_profiles)
        self._connections[topic] = conn
        self.counts[topic] = 0

    def has_topic(self, topic: str) -> bool:
        return topic in self._connections

    def write(self, topic: str, time_ns: int, data: bytes | memoryview) -> None:
        self._writer.write(self._connections[topic], int(time_ns), data)
        self.counts[topic] += 1

    def write_string(self, topic: str, time_ns: int, text: str) -> None:
        if topic not in self._connections:
            self.add_topic(topic, STRING_TYPE)
        self.write(topic, time_ns, serialize_string(text))

    def flush(self) -> None:
        """End the pending MCAP chunk now, so a crash loses at most what came after."""
        storage = self._writer.storage
        chunk = getattr(storage, "chunk", None)
        close_chunk = getattr(storage, "close_chunk", None)
        if chunk is not None and chunk.bio.tell() and close_chunk is not None:
            close_chunk()

    def close(self) -> None:
        if not self._closed:
            self._closed = True
            self._writer.close()

    def __enter__(self) -> "BagWriter":
        return self

    def __exit__(self, *exc) -> None:
        self.close()
