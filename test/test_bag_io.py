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

"""bagio: MCAP v9 bags with ROS 2 definitions; MCAP and sqlite3 bags read the same; damage."""
import struct

from helpaware_node.bag import (
    BagReadError,
    BagSource,
    BagWriter,
    deserialize_string,
    serialize_string,
    STRING_TYPE,
    typestore,
)
import pytest
from rosbags.rosbag2 import Reader, Writer
from rosbags.rosbag2.enums import StoragePlugin


def test_string_cdr_matches_rosbags_serialiser():
    # outside source: the rosbags typestore's own CDR serialiser and deserialiser
    store = typestore()
    for text in ["", "a", "abc", "abcd", "häll{}ö" * 7]:
        ours = serialize_string(text)
        ref = store.serialize_cdr(store.types[STRING_TYPE](data=text), STRING_TYPE)
        assert bytes(ours) == bytes(ref)
        assert deserialize_string(ref) == text
        assert store.deserialize_cdr(ours, STRING_TYPE).data == text


def test_written_bag_is_mcap_v9_with_definitions(tmp_path):
    path = tmp_path / "bag"
    with BagWriter(path, custom_data={"k": "v"}) as bag:
        for i in range(30):
            bag.write_string("decision", 1_000_000_000 + i, f"doc {i}")
    meta = (path / "metadata.yaml").read_text()
    assert "version: 9" in meta and "storage_identifier: mcap" in meta
    with Reader(path) as reader:
        conn = reader.connections[0]
        assert conn.msgtype == STRING_TYPE
        assert conn.msgdef.data.strip() == "string data"
        # the published type hash of std_msgs/msg/String (ROS 2 Iron and later)
        assert conn.digest == ("RIHS01_df668c740482bbd48fb39d76a70dfd4bd59db1288021743503259e"
                               "948f6b1a18")
        texts = [typestore().deserialize_cdr(raw, conn.msgtype).data
                 for _, _, raw in reader.messages()]
    assert texts == [f"doc {i}" for i in range(30)]


@pytest.mark.parametrize("plugin", [StoragePlugin.SQLITE3, StoragePlugin.MCAP])
def test_bags_in_the_ros2_recorder_layout_read_the_same(tmp_path, plugin):
    # a bag laid out as `ros2 bag record` writes it (namespaced topic, sqlite3 or mcap)
    path = tmp_path / "rec"
    store = typestore()
    with Writer(path, version=8, storage_plugin=plugin) as w:
        conn = w.add_connection("/robot1/decision", STRING_TYPE, typestore=store)
        for i in range(10):
            w.write(conn, 5 + i, store.serialize_cdr(store.types[STRING_TYPE](data=str(i)),
                                                     STRING_TYPE))
    src = BagSource(path)
    got = [(m.topic, deserialize_string(m.data)) for m in src.messages()]
    assert src.error is None
    assert src.storage == plugin.name.lower()
    assert got == [("/robot1/decision", str(i)) for i in range(10)]


def _big_bag(path, n=40000):
    with BagWriter(path) as bag:
        for i in range(n):
            bag.write_string("people", 1_000_000_000 + i * 1000, f"message number {i:06d}")
    return next(path.glob("*.mcap"))


def test_truncated_mcap_is_read_up_to_the_damage(tmp_path):
    mcap = _big_bag(tmp_path / "bag")
    data = mcap.read_bytes()
    mcap.write_bytes(data[: int(len(data) * 0.7)])
    src = BagSource(tmp_path / "bag")
    texts = [deserialize_string(m.data) for m in src.messages()]
    assert src.error is not None
    msg = str(src.error)
    assert str(mcap) in msg and f"{len(texts)} messages read" in msg
    assert 0 < len(texts) < 40000
    assert texts == [f"message number {i:06d}" for i in range(len(texts))]  # in order, intact


def test_garbage_file_names_the_file(tmp_path):
    bad = tmp_path / "x.mcap"
    bad.write_bytes(b"not a bag at all" * 10)
    src = BagSource(bad)
    assert list(src.messages()) == []
    assert str(bad) in str(src.error) and "0 messages read" in str(src.error)


def test_missing_path_is_a_clear_error(tmp_path):
    with pytest.raises(BagReadError, match="no such file"):
        BagSource(tmp_path / "nothing")


def test_short_string_payload_refused():
    with pytest.raises(ValueError):
        deserialize_string(b"\x00\x01\x00\x00" + struct.pack("<I", 50) + b"ab")


def test_record_scan_of_an_intact_file_agrees_with_rosbags(tmp_path):
    # two independent readers of the same MCAP: rosbags' indexed reader and our record scan
    from helpaware_node.bag import McapSalvage
    mcap = _big_bag(tmp_path / "bag", n=30000)
    scan = McapSalvage(mcap)
    scanned = [(t, m, ts, bytes(d)) for t, m, ts, d in scan.records()]
    assert scan.stop_reason == ""
    with Reader(tmp_path / "bag") as reader:
        indexed = [(c.topic, c.msgtype, ts, bytes(d)) for c, ts, d in reader.messages()]
    assert scanned == indexed and len(indexed) == 30000
