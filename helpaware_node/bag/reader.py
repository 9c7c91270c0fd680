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

"""Reading rosbag2 bags: MCAP or sqlite3, ours or made by `ros2 bag record`.

a bag directory or a single .mcap/.db3 file.  A truncated or corrupt MCAP file is read as far as
its records are whole (`BagReadError` says which file and how far), so a review can still report
what was there.
"""
from __future__ import annotations

from dataclasses import dataclass, field
import os
from pathlib import Path
import struct
from typing import Iterator, Optional

from rosbags.rosbag2 import Reader
from rosbags.rosbag2.errors import ReaderError

from .salvage import McapSalvage
from .types import BagReadError


@dataclass
class BagMessage:
    topic: str
    msgtype: str
    time_ns: int
    data: bytes


@dataclass
class BagInfo:
    path: str
    storage: str                      # "mcap" or "sqlite3"
    topics: dict[str, str] = field(default_factory=dict)       # topic -> type
    counts: dict[str, int] = field(default_factory=dict)       # from the index/metadata
    custom_data: dict = field(default_factory=dict)
    salvaged: bool = False            # read by scanning a damaged file


def _storage_of(path: Path) -> str:
    if path.is_dir():
        meta = path / "metadata.yaml"
        if meta.exists():
            text = meta.read_text(errors="replace")
            return "sqlite3" if "storage_identifier: sqlite3" in text else "mcap"
        files = sorted(path.glob("*.mcap")) or sorted(path.glob("*.db3"))
        if not files:
            raise BagReadError(str(path), "no metadata.yaml, .mcap or .db3 file in this directory")
        return "mcap" if files[0].suffix == ".mcap" else "sqlite3"
    return "sqlite3" if path.suffix == ".db3" else "mcap"


def _mcap_files(path: Path) -> list[Path]:
    if path.is_dir():
        return sorted(path.glob("*.mcap"))
    return [path]


class BagSource:
    """Iterate a bag's messages in time order; open() reports what it holds.

    If rosbags refuses the bag (truncated or corrupt MCAP), `messages()` falls back to a
    record-by-record scan that stops at the first damaged record; `error` then holds a
    BagReadError saying how far it got (the messages before it were all yielded).
    """

    def __init__(self, path: str | os.PathLike) -> None:
        self.path = Path(path)
        if not self.path.exists():
            raise BagReadError(str(self.path), "no such file or directory")
        self.storage = _storage_of(self.path)
        self.error: Optional[BagReadError] = None
        self.info = BagInfo(str(self.path), self.storage)
        self._reader: Optional[Reader] = None
        try:
            self._reader = Reader(self.path)
            self._reader.open()
        except (ReaderError, FileNotFoundError, OSError, KeyError, ValueError, struct.error,
                IndexError, TypeError) as exc:
            self._reader = None
            if self.storage != "mcap":
                raise BagReadError(str(self.path),
                                   f"cannot open {self.storage} bag: {exc}") from exc
            self._open_reason = f"damaged MCAP file ({exc})"
            self.info.salvaged = True
            return
        assert self._reader is not None   # opened above
        for conn in self._reader.connections:
            self.info.topics.setdefault(conn.topic, conn.msgtype)
            self.info.counts[conn.topic] = self.info.counts.get(conn.topic, 0) + conn.msgcount
        custom = getattr(getattr(self._reader.storage, "metadata", None), "custom", None)
        self.info.custom_data = dict(custom or {})

    @property
    def index_counts(self) -> Optional[dict[str, int]]:
        """Per-topic counts from the bag's own index.

        When the bag opened intact and its index accounts for every message (else None: count by
        reading).
        """
        if self._reader is None:
            return None
        total = self._reader.message_count
        if total and sum(self.info.counts.values()) == total:
            return dict(self.info.counts)
        return None

    @property
    def time_range_ns(self) -> Optional[tuple[int, int]]:
        if self._reader is None or not self._reader.message_count:
            return None
        return self._reader.start_time, self._reader.end_time - 1

    def raw(self, topics: Optional[set[str]] = None) -> Iterator[tuple[str, int, bytes]]:
        """(topic, time ns, data) without wrapping each message in an object (fast path)."""
        if self._reader is None:
            for m in self._salvage(topics):
                yield m.topic, m.time_ns, m.data
            return
        for conn, t_ns, data in self._indexed(topics):
            yield conn.topic, t_ns, data

    def messages(self, topics: Optional[set[str]] = None) -> Iterator[BagMessage]:
        if self._reader is None:
            yield from self._salvage(topics)
            return
        for conn, t_ns, data in self._indexed(topics):
            yield BagMessage(conn.topic, conn.msgtype, t_ns, data)

    def _indexed(self, topics: Optional[set[str]]):
        """Messages of an intact bag through its index.

        a failure part-way is kept in `self.error` with how far the reading got, instead of ending
        the caller.
        """
        reader = self._reader
        assert reader is not None   # messages() salvages a bag without one
        conns = [c for c in reader.connections if topics is None or c.topic in topics]
        if not conns:
            return
        count = 0
        last = None
        try:
            for conn, t_ns, data in reader.messages(connections=conns):
                count += 1
                last = t_ns
                yield conn, t_ns, data
        except (ReaderError, OSError, ValueError, struct.error, IndexError, EOFError) as exc:
            self.error = BagReadError(str(self.path), f"reading stopped: {exc}", count,
                                      last_time_ns=last)
        except Exception as exc:  # sqlite3.DatabaseError, zstd errors, ...
            self.error = BagReadError(str(self.path), f"reading stopped: "
                                      f"{type(exc).__name__}: {exc}", count, last_time_ns=last)

    def _salvage(self, topics: Optional[set[str]]) -> Iterator[BagMessage]:
        count = 0
        for f in _mcap_files(self.path):
            scan = McapSalvage(f)
            for topic, msgtype, t_ns, data in scan.records():
                self.info.topics.setdefault(topic, msgtype)
                self.info.counts[topic] = self.info.counts.get(topic, 0) + 1
                count += 1
                if topics is None or topic in topics:
                    yield BagMessage(topic, msgtype, t_ns, data)
            if scan.stop_reason:
                self.error = BagReadError(str(f), f"{self._open_reason}; {scan.stop_reason}",
                                          count, scan.bytes_ok, scan.last_time_ns)
                return
        self.error = BagReadError(str(self.path), self._open_reason, count)

    def close(self) -> None:
        if self._reader is not None:
            self._reader.close()
            self._reader = None
