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

"""The node's person records stay bounded on a busy site, without forgetting any limit.

Many distinct people (a concourse of strangers, or a fleet sharing everyone it met) would
otherwise grow the session's records by one entry per person forever. Beliefs live in the store, so
a dropped record comes back from it when the person is seen again.
"""
from helpaware_node.core.person import Result
from helpaware_node.store import StoredEvent
from node_harness import Rig


def test_records_are_bounded_and_come_back_from_the_store(ctx, tmp_path):
    rig = Rig(ctx, namespace="/bounded", store_path=str(tmp_path / "b.sqlite3"),
              robot_id="rM", min_reask_interval_s=3600.0)
    try:
        assert rig.connected()
        node = rig.node
        node.session.memory.max_records = 20
        assert rig.show_people([{"id": "nurse-kept", "distance_m": 1.0, "busyness": 0.0}])
        d = rig.open_need("keep1", "handover", urgency=1.0)
        assert d["action"] == "ask" and d["person_id"] == "nurse-kept"
        rig.report("keep1", "nurse-kept", "helped")
        kept = node.store.key_for("nurse-kept")
        # 200 people learned from the fleet, their records loaded (as a decision loads the
        # records of everyone in view), then out of view
        for i in range(200):
            key = node.store.key_for(f"visitor-{i}")
            assert node.session.peer_events([StoredEvent(f"peer/{i}", key, 100.0 + i,
                                                         Result.DECLINED, 0.2, 0.0)])
            node.session.memory.record_for(key)
        assert len(node.session.memory.records) > 200
        assert rig.spin_until(lambda: len(node.session.memory.records) <= 20)
        assert node.session.memory.evicted >= 180
        # the person asked within the ask memory keeps their record (and so their asks)
        records = node.session.memory.records
        assert kept in records and records[kept].ask_times_s
        # a dropped person comes back with the store's belief: Beta(2, 2) prior, one declined
        back = node.store.key_for("visitor-0")
        assert back not in node.session.memory.records
        belief_in_store = node.store.belief(back, node.params.model)[0]
        assert node.session.memory.record_for(back).belief == belief_in_store
        assert belief_in_store.b > 2.0          # the declined outcome is still in it
        # and the re-ask interval of the kept person still holds: asked again, refused
        assert rig.show_people([{"id": "nurse-kept", "distance_m": 1.0, "busyness": 0.0}])
        d = rig.open_need("keep2", "handover", urgency=1.0)
        rows = {r["person_id"]: r for r in d["rationale"]}
        assert rows["nurse-kept"]["excluded"] == "reask_interval"
    finally:
        rig.close()
