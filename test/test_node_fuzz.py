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

"""Hostile input: >= 1000 malformed documents per input topic.

The node stays up, counts each rejection, keeps its beliefs, and still decides afterwards. Most go
straight to the handlers (fast); a smaller set goes through the real topics and is read back from
/diagnostics.
"""
import json
import random

from document_paths import field_paths, replaced
from helpaware_node import wire
from node_harness import Rig
from std_msgs.msg import String

N_PER_TOPIC = 1000


def _valid(topic, now):
    if topic == "people":
        return json.loads(wire.people_document(
            [{"id": "nurse-a", "distance_m": 2.0, "busyness": 0.1, "activity": "charting",
              "position": [1.0, 0.0, 0.0]}], now))
    if topic == "task_status":
        return json.loads(wire.task_status_document("fz", "open", "door", 0.3, stamp_s=now))
    return json.loads(wire.outcome_document("nope-unknown", "nurse-a", "helped", stamp_s=now))


HOSTILE_VALUES = [None, "", " ", "x" * 5000, -1, -1e300, 1e300, 2, 10**30, True, False, [],
                  [None] * 600, {}, {"__proto__": 1}, "NaN", "\u0000", "\ud800", 0.5, "open"]


def hostile_corpus(topic, now, n, seed):
    """Malformed texts only: each one must be refused by the node."""
    rng = random.Random(seed)
    base = _valid(topic, now)
    out = ["", "not json", "{", "[]", "null", "1", '"text"', "{" * 5000 + "}" * 5000,
           "[" * 100000, json.dumps(base).replace("2.0", "NaN"),
           json.dumps(base).replace("2.0", "Infinity"), json.dumps(base)[:-3],
           json.dumps({**base, "extra": 1}), json.dumps({**base, "version": 2}),
           json.dumps({**base, "doc": "decision"}), '{"a":"' + "x" * 1_000_001 + '"}',
           json.dumps({**base, "pad": "y" * 999_000}), "\xff\xfe garbage"]
    if topic == "people":
        out.append(json.dumps({**base, "people": base["people"] * 501}))
        out.append(json.dumps({**base, "people": [{"id": "", "distance_m": 1.0}]}))
    paths = list(field_paths(base))
    while len(out) < n * 2:
        doc = replaced(base, rng.choice(paths), rng.choice(HOSTILE_VALUES))
        if rng.random() < 0.3 and isinstance(doc, dict):   # a second hit, or an unknown field
            doc = {**doc, rng.choice(list(doc) + ["unknown_field"]): rng.choice(HOSTILE_VALUES)}
        text = json.dumps(doc) if rng.random() < 0.9 else json.dumps(doc)[: rng.randint(0, 80)]
        out.append(text)
    bad = []
    for text in out:
        try:
            wire.decode(topic, text)
            if topic != "outcome":   # a valid outcome for an unknown request is refused too
                continue
        except wire.WireError:
            pass
        bad.append(text)
    assert len(bad) >= n, (topic, len(bad))
    return bad[: max(n, len(bad))]


def _snapshot(node):
    return ({k: (r.belief, r.ask_times_s) for k, r in node.session.memory.records.items()},
            set(node.session.needs), set(node.session.pending),
            [e for k in node.store.keys() for e in node.store.events_for(k)])


def test_thousands_of_hostile_documents_per_topic_at_the_handlers(ctx):
    rig = Rig(ctx, namespace="/fuzz")
    node = rig.node
    try:
        assert rig.connected()
        assert rig.show_people([{"id": "nurse-a", "distance_m": 2.0, "busyness": 0.1},
                                {"id": "porter-b", "distance_m": 3.0, "busyness": 0.5}])
        d = rig.open_need("real", "handover", urgency=1.0)
        assert d["action"] == "ask"
        rig.report("real", d["person_id"], "declined")  # learned state to protect
        node.session.needs.clear()
        before = _snapshot(node)
        handlers = {"people": node._on_people, "task_status": node._on_task_status,
                    "outcome": node._on_outcome}
        for i, (topic, handler) in enumerate(handlers.items()):
            corpus = hostile_corpus(topic, node.now_s(), N_PER_TOPIC, seed=i)
            r0 = node.counters.rejected[topic]
            for text in corpus:
                handler(String(data=text))
            assert node.counters.rejected[topic] - r0 == len(corpus) >= N_PER_TOPIC
            assert node.counters.last_reason[topic]
        seen_ids = set(node.session.seen)
        assert seen_ids == {"nurse-a", "porter-b"}          # nothing hostile got in
        assert _snapshot(node) == before                    # beliefs, needs, asks, store intact
        d2 = rig.open_need("after", "handover", urgency=1.0)
        assert d2["action"] in ("ask", "continue")           # still deciding
    finally:
        rig.close()


def test_hostile_documents_through_the_topics_are_counted_in_diagnostics(ctx):
    rig = Rig(ctx, namespace="/fuzzwire")
    node = rig.node
    try:
        assert rig.connected()
        pubs = {"task_status": rig.task_pub, "outcome": rig.outcome_pub}
        sent = {}
        for i, (topic, pub) in enumerate(pubs.items()):
            corpus = hostile_corpus(topic, node.now_s(), 60, seed=100 + i)[:60]
            for text in corpus:
                pub.publish(String(data=text))
                rig.executor.spin_once(timeout_sec=0.0)
            sent[topic] = len(corpus)
        # people is best effort: send one at a time and wait for it
        people = hostile_corpus("people", node.now_s(), 30, seed=7)[:30]
        for text in people:
            n = node.counters.received["people"]
            for _ in range(20):
                rig.people_pub.publish(String(data=text))
                if rig.spin_until(lambda: node.counters.received["people"] > n, 0.5):
                    break
        assert rig.spin_until(lambda: all(node.counters.rejected[t] == sent[t] for t in sent), 60)
        assert node.counters.rejected["people"] == node.counters.received["people"] >= 30

        def diag_says():
            for arr in rig.diagnostics:
                vals = {v.key: v.value for s in arr.status for v in s.values}
                if all(vals.get(f"{t}.rejected") == str(node.counters.rejected[t])
                       for t in ("people", "task_status", "outcome")):
                    return True
            return False
        assert rig.spin_until(diag_says, 30)
        assert node.session.memory.records == {} and node.session.needs == {}
    finally:
        rig.close()
