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

"""record: person ids hashed in wire documents; a live recording closed cleanly by SIGTERM."""
import json
import signal
import subprocess
import sys
import textwrap
import time

from helpaware_node import wire
from helpaware_node.bag import BagSource, deserialize_string, serialize_string
from helpaware_node.core import (
    candidate_from_record,
    decide,
    DecisionConfig,
    HelpNeed,
    PersonRecord,
    SiteModel,
)
from helpaware_node.store.base import person_key
from helpaware_node.tools.record import id_hasher
import pytest

KEY = b"test-site-key-of-32-bytes-length"
RAW = ["nurse-ward3-a", "porter-b"]


def _decision_text():
    model, config = SiteModel(), DecisionConfig()
    need = HelpNeed("need-1", "door", 100.0)
    cands = [candidate_from_record(pid, PersonRecord.new(model), 100.0, model, 2.0 + i, 100.0,
                                   0.1, "idle") for i, pid in enumerate(RAW)]
    d = decide(need, cands, 100.0, (), model, config)
    assert d.action == "ask"
    return wire.decision_text(d, (), model, config)


@pytest.mark.parametrize("name,text", [
    ("decision", _decision_text()),
    ("people", wire.people_document([{"id": p, "distance_m": 1.0} for p in RAW], 5.0)),
    ("outcome", wire.outcome_document("need-1", RAW[0], "helped", 9.0)),
])
def test_hashing_leaves_no_raw_id_and_a_valid_document(name, text):
    out = deserialize_string(id_hasher(KEY)(serialize_string(text)))
    for raw in RAW:
        assert raw not in out
    doc = wire.decode(name, out)          # still a valid document of its kind
    assert person_key(KEY, RAW[0]) in out
    if name == "decision":
        assert doc["person_id"] == person_key(KEY, RAW[0])
        assert {c["person_id"] for c in doc["candidates"]} == {person_key(KEY, p) for p in RAW}


def test_non_json_is_refused_not_stored():
    with pytest.raises(ValueError):
        id_hasher(KEY)(serialize_string("not json"))


PUBLISHER = textwrap.dedent("""
    import sys, time, rclpy
    from rclpy.node import Node
    from std_msgs.msg import String
    from helpaware_node import wire
    rclpy.init()
    node = Node("fake_decider")
    pub = node.create_publisher(String, "people", 10)
    deadline = time.monotonic() + 30.0
    while pub.get_subscription_count() == 0 and time.monotonic() < deadline:
        rclpy.spin_once(node, timeout_sec=0.05)
    for i in range(40):
        pub.publish(String(data=wire.people_document(
            [{"id": "nurse-ward3-a", "distance_m": 1.5, "busyness": 0.2}], float(i))))
        rclpy.spin_once(node, timeout_sec=0.02)
    print("published 40", flush=True)
    node.destroy_node()
    rclpy.try_shutdown()
""")


def test_live_recording_hashes_ids_and_closes_cleanly_on_sigterm(tmp_path):
    key = tmp_path / "site.key"
    key.write_bytes(KEY)
    key.chmod(0o600)
    bag = tmp_path / "live"
    rec = subprocess.Popen([sys.executable, "-m", "helpaware_node.cli", "record", "-o", str(bag),
                            "--site-key-file", str(key), "--duration", "120"],
                           stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        pub = subprocess.run([sys.executable, "-c", PUBLISHER], capture_output=True, text=True,
                             timeout=90)
        assert "published 40" in pub.stdout, pub.stderr
        # let the last messages arrive (bounded), then stop the recorder as a service would
        deadline = time.monotonic() + 3.0
        while time.monotonic() < deadline and rec.poll() is None:
            time.sleep(0.1)
        rec.send_signal(signal.SIGTERM)
        out, err = rec.communicate(timeout=30)
    finally:
        if rec.poll() is None:
            rec.kill()
    assert rec.returncode == 0, err
    assert "bag written" in out and "messages" in err      # progress / final count line
    assert (bag / "metadata.yaml").exists()
    src = BagSource(bag)
    texts = [deserialize_string(m.data) for m in src.messages()]
    assert src.error is None and src.info.topics["/people"] == "std_msgs/msg/String"
    # the node's other topics are in the bag with their types, and no messages
    assert src.info.topics["/diagnostics"] == "diagnostic_msgs/msg/DiagnosticArray"
    assert {t for t, n in src.info.counts.items() if n} == {"/people"}
    assert 0 < len(texts) <= 40
    assert src.info.custom_data["helpaware.person_ids"] == "hmac-sha256"
    assert all("nurse-ward3-a" not in t for t in texts)
    assert json.loads(texts[0])["people"][0]["id"] == person_key(KEY, "nurse-ward3-a")
