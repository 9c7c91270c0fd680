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

"""The decision node on the fleet topic.

Only documents signed with the site key change what it learns.  A peer without the key publishes 1
000 documents through the topic (unsigned, the old unsigned format, signed for another site,
forged, signed with a key of this site it does not hold): none is stored or merged, each is counted
by reason in /diagnostics, each reason is logged once.  A peer with the key is merged.  An old
store is re-offered signed at start.

Checks against outside sources: stored rows are read with the sqlite3 module; beliefs after a
merge are core.person.fold_events of the stored events (the fold the design defines); person
keys are computed with Python's hmac.
"""
import hashlib
import hmac
import json
import os
import random
import sqlite3
import time

import pytest

rclpy = pytest.importorskip("rclpy")
# I100: these come after pytest.importorskip("rclpy"), so after the pytest import
from helpaware_node.core import fold_events, Result  # noqa: E402,I100
from helpaware_node.fleet_documents import (  # noqa: E402
    decode_document,
    encode_document,
    PrivacyAct,
)
from helpaware_node.ros.fleet import fleet_qos, FLEET_TOPIC, FleetLink  # noqa: E402
from helpaware_node.signing import canonical_bytes  # noqa: E402
from helpaware_node.store import SiteKeys, SqliteStore, StoredEvent  # noqa: E402
from helpaware_node.store.keys import rotate_signing_key  # noqa: E402
from node_harness import Rig  # noqa: E402
from rclpy.executors import SingleThreadedExecutor  # noqa: E402
from site_keys import write_site_key  # noqa: E402
from std_msgs.msg import String  # noqa: E402

SITE_KEY = bytes(range(140, 172))
STRANGER_KEY = bytes(range(200, 232))
FORGED = 1000
NURSE, PORTER = "nurse-ingrid", "porter-bo"


def key_of(raw: str) -> str:
    return hmac.new(SITE_KEY, raw.encode(), hashlib.sha256).hexdigest()


def stored_rows(path):
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True, timeout=10.0)
    try:
        events = {r[0]: r for r in conn.execute("SELECT event_id, person_key FROM events")}
        opted = {r[0] for r in conn.execute("SELECT person_key FROM opt_out")}
    finally:
        conn.close()
    return events, opted


def forged_documents(n: int, rng: random.Random) -> list[str]:
    """Return what a peer without the site key can send: every way of getting it wrong."""
    site = SiteKeys.single(SITE_KEY)
    stranger = SiteKeys.single(STRANGER_KEY).key_ring()
    same_site_other_key = SiteKeys(SITE_KEY, os.urandom(32)).key_ring()   # site id right
    out = []
    for i in range(n):
        e = StoredEvent(f"intruder/{i}", key_of(rng.choice([NURSE, PORTER])), 500.0 + i,
                        Result.DECLINED, 0.1, 0.0, "door")
        way = i % 5
        if way == 0:                     # signed for another site
            out.append(encode_document("outcome", e, stranger))
        elif way == 1:                   # the right site id and key id, a guessed signature
            doc = json.loads(encode_document("outcome", e, site.key_ring()))
            doc["result"] = "helped"
            doc["sig"] = hmac.new(os.urandom(32), canonical_bytes(doc),
                                  hashlib.sha256).hexdigest()
            out.append(json.dumps(doc))
        elif way == 2:                   # unsigned v2
            doc = json.loads(encode_document("outcome", e, stranger))
            out.append(json.dumps({k: v for k, v in doc.items()
                                   if k not in ("sig", "site", "key_id")}))
        elif way == 3:                   # the old unsigned format
            out.append(json.dumps({"v": 1, "kind": "forget", "person_key": key_of(NURSE),
                                   "from": "intruder"}))
        else:                            # this site's id, a signing key it does not hold
            out.append(encode_document("opt_out", PrivacyAct.new(
                "opt_out", key_of(PORTER), "intruder"), same_site_other_key))
    return out


def test_a_peer_without_the_key_publishes_1000_documents_and_none_is_stored(ctx, tmp_path):
    write_site_key(tmp_path, SITE_KEY)
    path = tmp_path / "beliefs.sqlite3"
    rig = Rig(ctx, namespace="/guarded", store_path=str(path), robot_id="ward3")
    try:
        assert rig.connected()
        assert rig.show_people([{"id": NURSE, "distance_m": 1.0, "busyness": 0.0}])
        assert rig.open_need("n1", "handover", urgency=1.0)["action"] == "ask"
        rig.report("n1", NURSE, "helped")
        before_rows = stored_rows(path)
        before_belief = rig.node.session.memory.records[key_of(NURSE)].belief
        intruder = rig.driver.create_publisher(String, FLEET_TOPIC, fleet_qos(FORGED))
        assert rig.spin_until(lambda: intruder.get_subscription_count() > 0)
        for text in forged_documents(FORGED, random.Random(7)):
            intruder.publish(String(data=text))
        fleet = rig.node.fleet
        assert rig.spin_until(lambda: fleet.refused_count >= FORGED, 120.0), fleet.refused_count
        rig.spin_until(lambda: False, 0.5)          # anything still on its way arrives
        assert fleet.refused_count == FORGED and fleet.merged_count == 0
        assert dict(fleet.refusals) == {"other_site": 200, "bad_signature": 200,
                                        "unsigned": 200, "old_format": 200, "unknown_key": 200}
        assert stored_rows(path) == before_rows       # not one event, opt-out or forget
        assert rig.node.session.memory.records[key_of(NURSE)].belief == before_belief
        assert fleet._refused.lines == 5                  # each reason logged once (throttled)

        def reported():
            for arr in rig.diagnostics:
                for s in arr.status:
                    v = {x.key: x.value for x in s.values}
                    if v.get("fleet_outcomes.rejected") == str(FORGED):
                        return v
        assert rig.spin_until(lambda: reported() is not None)
        values = reported()
        for reason in ("other_site", "bad_signature", "unsigned", "old_format", "unknown_key"):
            assert values[f"fleet_outcomes.refused.{reason}"] == "200"
        # ... and the robot still decides
        d = rig.open_need("n2", "handover", urgency=1.0)
        assert d["request_id"] == "n2" and d["action"] in ("ask", "continue")

        # a peer WITH the key: its events are merged and learned from
        keys = SiteKeys.single(SITE_KEY).key_ring()
        friend = [StoredEvent(f"ward4/{i}", key_of(PORTER), 600.0 + i, r, 0.2, 0.1, "door")
                  for i, r in enumerate([Result.HELPED, Result.DECLINED, Result.HELPED])]
        for e in friend:
            intruder.publish(String(data=encode_document("outcome", e, keys)))
        assert rig.spin_until(lambda: fleet.merged_count == 3)
        events, _ = stored_rows(path)
        assert {f"ward4/{i}" for i in range(3)} <= events.keys()
        assert not any(eid.startswith("intruder/") for eid in events)
        expected = fold_events([e.to_outcome() for e in friend], rig.node.params.model)[0]
        assert rig.node.session.memory.record_for(key_of(PORTER)).belief == expected
    finally:
        rig.close()


def test_an_old_store_is_offered_signed_and_a_rotated_key_file_still_talks(ctx, tmp_path):
    """Check that an old store is offered signed and a rotated key file still talks.

    Migration: a store written before signatures (the schema did not change) is re-offered at start
    as signed v2 documents; after a rotation of the signing key, documents signed with the previous
    key are still merged within the window.
    """
    key_path = write_site_key(tmp_path, SITE_KEY)
    old = SqliteStore(tmp_path / "old.sqlite3", "ward1", SITE_KEY)
    history = [StoredEvent(f"ward1/{i + 1}", key_of(NURSE), 100.0 + i, Result.HELPED, 0.1, 0.0)
               for i in range(5)]
    old.bulk_load(history)
    old.close()
    node = rclpy.create_node("migration_listener", context=ctx)
    executor = SingleThreadedExecutor(context=ctx)
    executor.add_node(node)
    heard = []
    node.create_subscription(String, "/migration/fleet", lambda m: heard.append(m.data),
                             fleet_qos())
    store = SqliteStore(tmp_path / "old.sqlite3", "ward1", SiteKeys.single(SITE_KEY))
    try:
        link = FleetLink(node, store, topic="/migration/fleet")
        end = time.monotonic() + 20.0
        while len(heard) < 5 and time.monotonic() < end:
            executor.spin_once(timeout_sec=0.05)
        keys = SiteKeys.single(SITE_KEY).key_ring()
        assert [decode_document(t, keys)[1] for t in heard[:5]] == history
        assert all(json.loads(t)["v"] == 2 for t in heard)

        previous_keys = link.keys
        rotated = rotate_signing_key(key_path, 86400.0)
        ring = rotated.key_ring()
        assert ring.previous.key_id == previous_keys.current.key_id
        late = StoredEvent("ward2/1", key_of(PORTER), 300.0, Result.DECLINED, 0.3, 0.0)
        rotated_link = FleetLink(node, SqliteStore(tmp_path / "new.sqlite3", "ward5", rotated),
                                 topic="/migration/other", replay=False)
        text = encode_document("outcome", late, previous_keys)   # a robot not yet updated
        rotated_link._on_message(String(data=text))
        assert rotated_link.merged_count == 1 and rotated_link.refused_count == 0
        rotated_link._store.close()
    finally:
        store.close()
        executor.shutdown(timeout_sec=1.0)
        node.destroy_node()


@pytest.mark.parametrize("overrides, words", [
    ({"fleet_topic": "/helpaware/x", "privacy_topic": "/helpaware/x"}, "must differ"),
    ({"fleet_topic": "not a topic!"}, "fleet_topic: 'not a topic!' is not a valid topic name"),
    ({"privacy_topic": ""}, "privacy_topic: must not be empty"),
])
def test_bad_topic_parameters_are_refused_naming_them(ctx, overrides, words):
    from helpaware_node.ros.node import HelpAwareNode, StartupError
    from node_harness import overrides as params
    with pytest.raises(StartupError, match=words):
        HelpAwareNode(context=ctx, parameter_overrides=params(store_path="memory", **overrides))
