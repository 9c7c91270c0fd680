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

"""A record-by-record scan of an MCAP file that stops at the first damaged record."""
from __future__ import annotations

from pathlib import Path
import struct
from typing import Iterator, Optional

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
                from backports import zstd
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
