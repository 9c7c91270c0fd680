"""Reading and writing rosbag2 bags with the `rosbags` library (no ROS install needed).

Writing: always MCAP storage, rosbag2 format version 9, with the ROS 2 message definition and
type hash of every topic, so `ros2 bag info/play` and any rosbag2 reader accept the bag.
Reading: MCAP or sqlite3 bags, ours or made by `ros2 bag record`; a bag directory or a single
.mcap/.db3 file.  A truncated or corrupt MCAP file is read as far as its records are whole
(`BagReadError` says which file and how far), so a review can still report what was there.
"""
from __future__ import annotations

import os
import struct
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator, Optional

from rosbags.rosbag2 import Reader, Writer
from rosbags.rosbag2.enums import StoragePlugin
from rosbags.rosbag2.errors import ReaderError
from rosbags.typesys import Stores, get_typestore

STRING_TYPE = "std_msgs/msg/String"
MARKER_ARRAY_TYPE = "visualization_msgs/msg/MarkerArray"
DIAGNOSTIC_ARRAY_TYPE = "diagnostic_msgs/msg/DiagnosticArray"
GOAL_STATUS_ARRAY_TYPE = "action_msgs/msg/GoalStatusArray"
KNOWN_TYPES = (STRING_TYPE, MARKER_ARRAY_TYPE, DIAGNOSTIC_ARRAY_TYPE, GOAL_STATUS_ARRAY_TYPE)
BAG_FORMAT_VERSION = 9

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
    """ROS 2 message definitions (the 'kilted' set; String, MarkerArray, ... are identical
    across current distributions, so their type hashes match what the node publishes)."""
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
    """The text of a CDR-serialised std_msgs/String (either byte order)."""
    if len(data) < 8:
        raise ValueError(f"{len(data)} bytes is too short for a std_msgs/String")
    little = data[1] == 1
    (n,) = struct.unpack_from("<I" if little else ">I", data, 4)
    if n == 0 or 8 + n > len(data):
        raise ValueError(f"std_msgs/String length {n} does not fit in {len(data)} bytes")
    return bytes(data[8:8 + n - 1]).decode("utf-8")


# ------------------------------------------------------------------------------------ writing

class BagWriter:
    """Writes raw (already serialised) messages into a new MCAP bag.

    Use as a context manager or call close(); close() writes metadata.yaml and the MCAP
    summary, so the bag is complete even when recording stops by a signal.
    """

    def __init__(self, path: str | os.PathLike, custom_data: Optional[dict] = None) -> None:
        self.path = Path(path)
        self._writer = Writer(self.path, version=BAG_FORMAT_VERSION,
                              storage_plugin=StoragePlugin.MCAP)
        for key, value in (custom_data or {}).items():
            self._writer.set_custom_data(key, str(value))
        self._writer.open()
        self._connections: dict[str, object] = {}
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
        if chunk is not None and chunk.bio.tell() and hasattr(storage, "close_chunk"):
            storage.close_chunk()

    def close(self) -> None:
        if not self._closed:
            self._closed = True
            self._writer.close()

    def __enter__(self) -> "BagWriter":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


# ------------------------------------------------------------------------------------ reading

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
                raise BagReadError(str(self.path), f"cannot open {self.storage} bag: {exc}") from exc
            self._open_reason = f"damaged MCAP file ({exc})"
            self.info.salvaged = True
            return
        for conn in self._reader.connections:
            self.info.topics.setdefault(conn.topic, conn.msgtype)
            self.info.counts[conn.topic] = self.info.counts.get(conn.topic, 0) + conn.msgcount
        custom = getattr(getattr(self._reader.storage, "metadata", None), "custom", None)
        self.info.custom_data = dict(custom or {})

    @property
    def index_counts(self) -> Optional[dict[str, int]]:
        """Per-topic counts from the bag's own index, when the bag opened intact and its index
        accounts for every message (else None: count by reading)."""
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
        """Messages of an intact bag through its index; a failure part-way is kept in
        `self.error` with how far the reading got, instead of ending the caller."""
        conns = [c for c in self._reader.connections if topics is None or c.topic in topics]
        if not conns:
            return
        count = 0
        last = None
        try:
            for conn, t_ns, data in self._reader.messages(connections=conns):
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


_MAGIC = b"\x89MCAP0\r\n"


class McapSalvage:
    """Scan an MCAP file record by record, stopping cleanly at the first incomplete record.

    Only what a review needs: schemas, channels, messages (also inside uncompressed, zstd
    or lz4 chunks).  Messages are yielded in file order (our writer writes them in time order).
    """

    def __init__(self, path: Path) -> None:
        self.path = path
        self.bytes_ok = 0
        self.last_time_ns: Optional[int] = None
        self.stop_reason = ""

    def records(self) -> Iterator[tuple[str, str, int, bytes]]:
        data = self.path.read_bytes()
        if not data.startswith(_MAGIC):
            self.stop_reason = "no MCAP magic at the start of the file"
            return
        schemas: dict[int, str] = {}
        channels: dict[int, tuple[str, str]] = {}
        pos = len(_MAGIC)
        self.bytes_ok = pos
        while pos < len(data):
            if data[pos:pos + 8] == _MAGIC:
                return  # the end magic: file complete after all
            if pos + 9 > len(data):
                self.stop_reason = f"file ends inside a record header at byte {pos}"
                return
            op = data[pos]
            (length,) = struct.unpack_from("<Q", data, pos + 1)
            body_start = pos + 9
            if body_start + length > len(data):
                self.stop_reason = (f"file ends inside a record (opcode 0x{op:02x}, {length} "
                                    f"bytes) at byte {pos}")
                return
            body = memoryview(data)[body_start:body_start + length]
            try:
                if op == 0x06:
                    yield from self._chunk(body, schemas, channels)
                else:
                    yield from self._record(op, body, schemas, channels)
            except (struct.error, ValueError, UnicodeDecodeError, KeyError) as exc:
                self.stop_reason = f"corrupt record (opcode 0x{op:02x}) at byte {pos}: {exc}"
                return
            pos = body_start + length
            self.bytes_ok = pos
        self.stop_reason = f"file ends at byte {len(data)} without the MCAP footer"

    def _record(self, op, body, schemas, channels):
        if op == 0x03:      # schema: id u16, name, encoding, data
            (sid,) = struct.unpack_from("<H", body, 0)
            name, _ = _string(body, 2)
            schemas[sid] = name
        elif op == 0x04:    # channel: id u16, schema id u16, topic, encoding, metadata
            cid, sid = struct.unpack_from("<HH", body, 0)
            topic, _ = _string(body, 4)
            channels[cid] = (topic, schemas.get(sid, ""))
        elif op == 0x05:    # message: channel u16, sequence u32, log time u64, publish u64, data
            cid, _seq, log_time = struct.unpack_from("<HIQ", body, 0)
            topic, msgtype = channels[cid]
            self.last_time_ns = log_time
            yield topic, msgtype, log_time, bytes(body[22:])

    def _chunk(self, body, schemas, channels):
        # start u64, end u64, uncompressed size u64, crc u32, compression str, records bytes
        (usize,) = struct.unpack_from("<Q", body, 16)
        comp, off = _string(body, 28)
        (csize,) = struct.unpack_from("<Q", body, off)
        payload = bytes(body[off + 8:off + 8 + csize])
        if comp == "zstd":
            try:
                from compression import zstd  # type: ignore
            except ImportError:
                from backports import zstd  # type: ignore
            payload = zstd.decompress(payload)
        elif comp == "lz4":
            import lz4.frame
            payload = lz4.frame.decompress(payload)
        elif comp:
            raise ValueError(f"unknown chunk compression {comp!r}")
        if len(payload) != usize:
            raise ValueError("chunk size does not match its header")
        pos = 0
        view = memoryview(payload)
        while pos + 9 <= len(payload):
            op = payload[pos]
            (length,) = struct.unpack_from("<Q", payload, pos + 1)
            yield from self._record(op, view[pos + 9:pos + 9 + length], schemas, channels)
            pos += 9 + length


def _string(buf, off: int) -> tuple[str, int]:
    (n,) = struct.unpack_from("<I", buf, off)
    return bytes(buf[off + 4:off + 4 + n]).decode("utf-8"), off + 4 + n
