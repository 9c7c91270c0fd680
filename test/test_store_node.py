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

"""The node on a damaged store file.

Starts on priors, file moved aside, ERROR in diagnostics, keeps deciding and learning; and a live
forget through privacy_request.
"""
import os

from diagnostic_msgs.msg import DiagnosticStatus
from helpaware_node.core.belief import Belief
from helpaware_node.store.keys import load_site_key
from node_harness import Rig


def test_damaged_store_file_node_starts_on_priors_and_reports_error(ctx, tmp_path):
    load_site_key(tmp_path / "site_key")
    path = tmp_path / "beliefs.sqlite3"
    damaged = b"SQLite format 3\x00" + os.urandom(5000)     # right header, garbage after
    path.write_bytes(damaged)
    rig = Rig(ctx, namespace="/damaged", store_path=str(path), robot_id="rX")
    try:
        assert rig.connected()
        aside = [p for p in os.listdir(tmp_path) if ".corrupt-" in p]
        assert len(aside) == 1 and (tmp_path / aside[0]).read_bytes() == damaged
        assert rig.node.store.health.level == "ERROR"

        def error_reported():
            return any(s.level == DiagnosticStatus.ERROR and aside[0] in {
                v.key: v.value for v in s.values}.get("store_last_error", "")
                for a in rig.diagnostics for s in a.status)
        assert rig.spin_until(error_reported)
        # keeps working: decides on the prior and learns from an outcome
        assert rig.show_people([{"id": "nurse-a", "distance_m": 1.0, "busyness": 0.0}])
        d = rig.open_need("n1", "handover", urgency=1.0)
        assert d["action"] == "ask" and (d["candidates"][0]["a"], d["candidates"][0]["b"]) == (2.0,
                                                                                               2.0)
        rig.report("n1", "nurse-a", "helped")
        key = rig.node.store.key_for("nurse-a")
        assert rig.node.session.memory.records[key].belief == Belief(3.0, 2.0)
        assert len(rig.node.store.events_for(key)) == 1
        # live forget through the node: store and memory both drop the person at once
        rig.send_privacy("forget", "nurse-a")
        assert rig.spin_until(lambda: key not in rig.node.session.memory.records and
                              key not in rig.node.store.keys())
        rig.send_privacy("opt_out", "nurse-a")
        assert rig.spin_until(lambda: rig.node.store.is_opted_out(key))
        d = rig.open_need("n2", "handover", urgency=1.0)
        assert d["action"] == "continue"
        nurse = [r for r in d["rationale"] if r["person_id"] == "nurse-a"][0]
        assert nurse["excluded"] == "opted_out"
    finally:
        rig.close()


def test_privacy_requests_on_a_store_file_hold_at_once_on_disk_and_after_a_restart(ctx, tmp_path):
    """The rows go on the node's store worker.

    Decisions respect the request before that, the answer on the fleet topic comes after it, and a
    restart keeps it.
    """
    import sqlite3

    from helpaware_node.fleet_documents import decode_document
    from std_msgs.msg import String
    path = str(tmp_path / "beliefs.sqlite3")
    people = [{"id": "nurse-a", "distance_m": 1.0, "busyness": 0.0},
              {"id": "porter-b", "distance_m": 1.5, "busyness": 0.0}]
    rig = Rig(ctx, namespace="/jobs1", store_path=path, robot_id="rJ")
    try:
        assert rig.connected() and rig.show_people(people)
        d = rig.open_need("j1", "handover", urgency=1.0)
        rig.report("j1", d["person_id"], "helped")
        asked = rig.node.store.key_for(d["person_id"])
        other_id = "porter-b" if d["person_id"] == "nurse-a" else "nurse-a"
        other = rig.node.store.key_for(other_id)
        answers = []
        rig.driver.create_subscription(String, rig.node.fleet.topic,
                                       lambda m: answers.append(m.data), 50)
        opt = rig.send_privacy("opt_out", other_id)
        forget = rig.send_privacy("forget", d["person_id"])
        assert rig.spin_until(lambda: rig.node.store.is_opted_out(other)
                              and asked not in rig.node.store.keys())
        assert rig.spin_until(lambda: rig.node.store_jobs.pending == 0)

        def answered():
            ids = set()
            for text in answers:
                try:
                    ids.add(decode_document(text, rig.node.fleet.keys)[1].request_id)
                except Exception:  # noqa: BLE001 - other kinds of fleet documents
                    pass
            return {opt.act_id, forget.act_id} <= ids
        assert rig.spin_until(answered)
        conn = sqlite3.connect(path)      # on disk, read past the node's store
        try:
            assert conn.execute("SELECT count(*) FROM opt_out WHERE person_key = ?",
                                (other,)).fetchone()[0] == 1
            assert conn.execute("SELECT count(*) FROM events WHERE person_key = ?",
                                (asked,)).fetchone()[0] == 0
        finally:
            conn.close()
        d2 = rig.open_need("j2", "handover", urgency=1.0)
        row = [r for r in d2["rationale"] if r["person_id"] == other_id][0]
        assert row["excluded"] == "opted_out" and d2["person_id"] != other_id
    finally:
        rig.close()
    rig = Rig(ctx, namespace="/jobs2", store_path=path, robot_id="rJ")
    try:
        assert rig.connected() and rig.node.store.is_opted_out(other)
        assert rig.node.store.events_for(asked) == []
        assert rig.show_people(people)
        d3 = rig.open_need("j3", "handover", urgency=1.0)
        row = [r for r in d3["rationale"] if r["person_id"] == other_id][0]
        assert row["excluded"] == "opted_out"
    finally:
        rig.close()
