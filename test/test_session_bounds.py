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

"""The help session stays bounded whatever perception and navigation send.

The help session stays bounded whatever perception and navigation send (issue 14 items 3 and 4), on
a MemoryStore without ROS.

- People in view: people from successive documents piled up (500, then 500 others, gave a
  decision with 1 000 candidates, which wire.decode refuses). Now at most wire.MAX_CANDIDATES
  stay, the stale and then the farthest going first, and each decision fits in
  wire.MAX_DOCUMENT_BYTES even with the longest ids and 1 000 remembered asks per person.
- Navigation: one status array with 20 000 aborted goals gave 20 000 decisions. Now one array
  gives at most one (from its newest aborted goal), and only its last MAX_GOAL_STATUSES
  entries are looked at.

Oracles: the project's own document decoder (wire.decode: the schema a reader applies) and
the JSON text length; which people stay is computed here by sorting the inputs by distance.
"""
from __future__ import annotations

import json

from helpaware_node import wire
from helpaware_node.core import DecisionConfig, HelpNeed, PersonRecord, SiteModel
from helpaware_node.session import HelpSession, SessionRules
from helpaware_node.session.state import MAX_GOAL_STATUSES, MAX_PEOPLE_IN_VIEW
from helpaware_node.store import MemoryStore
from session_people import Person

MODEL = SiteModel()
CONFIG = DecisionConfig(interruption_weight_s=0.0, max_distance_m=1e6)
T0 = 100_000.0


def session(config=CONFIG):
    return HelpSession(MemoryStore(robot_id="r1"), MODEL, config, SessionRules(), now_s=T0)


def published(out, config=CONFIG) -> str:
    """Return the decision as the node publishes it (fast_text), read back by the schema."""
    doc = wire.decision_to_document(out.decision, out.robot_ask_times_s, None, None, "r1",
                                    check=False)
    text = wire.fast_text(doc, MODEL, config)
    wire.decode("decision", text)              # valid by its own schema, or this raises
    assert len(text.encode("utf-8")) <= wire.MAX_DOCUMENT_BYTES
    return text


def crowd(prefix, n, start_m=1.0):
    return [Person(f"{prefix}{i}", start_m + 0.01 * i) for i in range(n)]


def test_the_schema_limit_is_the_bound():
    assert MAX_PEOPLE_IN_VIEW == wire.MAX_CANDIDATES == 500


def test_two_crowds_in_quick_succession_give_a_valid_decision_of_the_nearest():
    s = session()
    first, second = crowd("a", 500, start_m=3.0), crowd("b", 500, start_m=1.0)
    s.people_seen(first, T0)
    s.people_seen(second, T0 + 1.0)          # both fresh (max_observation_age_s is 3 s)
    [out] = s.need_opened(HelpNeed("n1", "door", T0 + 1.0, urgency=1.0), T0 + 1.0).decisions
    doc = json.loads(published(out))
    nearest = sorted(first + second, key=lambda p: p.distance_m)[:500]
    assert len(doc["candidates"]) == 500
    assert {c["person_id"] for c in doc["candidates"]} == {p.person_id for p in nearest}
    assert s.people_dropped == 500 and len(s.seen) == 500


def test_stale_people_go_before_near_ones():
    s = session()
    s.people_seen(crowd("old", 500, start_m=0.5), T0)
    later = T0 + 4.0                          # the old crowd is 4 s old: stale (3 s), listed
    s.people_seen(crowd("new", 500, start_m=5.0), later)
    assert set(s.seen) == {f"new{i}" for i in range(500)}
    [out] = s.need_opened(HelpNeed("n1", "door", later, urgency=1.0), later).decisions
    assert len(json.loads(published(out))["candidates"]) == 500


def test_a_pile_of_many_documents_stays_bounded():
    s = session()
    for k in range(9):                        # 4 500 people within one second
        s.people_seen(crowd(f"d{k}-", 500, start_m=1.0 + k), T0 + 0.1 * k)
    assert len(s.seen) == 500
    [out] = s.need_opened(HelpNeed("n1", "door", T0 + 1.0, urgency=1.0), T0 + 1.0).decisions
    assert len(json.loads(published(out))["candidates"]) == 500


def test_the_largest_candidates_still_fit_in_one_document():
    """Check that the largest candidates still fit in one document.

    500 people with 128-character ids outside the Basic Multilingual Plane (12 bytes each once
    escaped), 64-character activities and 1 000 remembered asks each: only the nearest that fit in
    one document are candidates, and the document is valid.
    """
    s = session()
    wide = "\U0001F600"
    people = [Person(f"{i:04d}" + wide * 124, 1.0 + i, 0.1, wide * 64) for i in range(500)]
    s.people_seen(people, T0)
    asks = tuple(T0 - 3000.0 - i for i in range(1000))[::-1]
    for p in people:
        key = s.store.key_for(p.person_id)
        s.memory.records[key] = PersonRecord(PersonRecord.new(MODEL).belief, ask_times_s=asks)
    [out] = s.need_opened(HelpNeed("n" * 128, "k" * 64, T0, urgency=1.0), T0).decisions
    doc = json.loads(published(out))
    n = len(doc["candidates"])
    assert 10 < n < 500
    assert [c["person_id"] for c in doc["candidates"]] == [p.person_id for p in people[:n]]
    for c, row in zip(doc["candidates"], doc["rationale"]):       # the bound holds each time
        cand = next(x for x in out.decision.evaluation.candidates if x.person_id == c["person_id"])
        assert len(json.dumps(c)) + len(json.dumps(row)) + 2 <= wire.candidate_bytes_bound(cand)


def statuses(n, status="aborted", first_stamp=1.0):
    return [(f"{i:08x}" + "0" * 24, status, first_stamp + i) for i in range(n)]


def test_a_status_array_of_20000_aborted_goals_gives_one_decision():
    s = session()
    s.people_seen(crowd("p", 3), T0)
    array = statuses(20_000)
    step = s.navigation_status(array, T0)
    assert len(step.decisions) == 1
    assert step.decisions[0].decision.evaluation.need.request_id == f"nav-{19_999:08x}" + "0" * 24
    assert len(s.needs) == 1
    assert s.navigation_status(array, T0 + 1).decisions == []      # the same array again
    assert len(s.needs) == 1


def test_the_newest_abort_by_stamp_not_by_position():
    s = session()
    s.people_seen(crowd("p", 3), T0)
    array = [("aa" * 16, "aborted", 50.0), ("bb" * 16, "aborted", 90.0),
             ("cc" * 16, "aborted", 70.0)]
    [out] = s.navigation_status(array, T0).decisions
    assert out.decision.evaluation.need.request_id == "nav-" + "bb" * 16
    # an abort stamped before the one handled is history, even if never seen before
    assert s.navigation_status([("dd" * 16, "aborted", 80.0)], T0).decisions == []


def test_a_newer_abort_replaces_the_open_need_unless_an_ask_is_out():
    s = session(DecisionConfig(interruption_weight_s=0.0, max_distance_m=1e6,
                               min_reask_interval_s=0.0))
    s.people_seen(crowd("p", 3), T0)
    [first] = s.navigation_status([("aa" * 16, "aborted", 10.0)], T0).decisions
    assert first.decision.action == "ask"          # an ask is out for it
    assert s.navigation_status([("bb" * 16, "aborted", 20.0)], T0 + 1).decisions == []
    assert list(s.needs) == ["nav-" + "aa" * 16]
    s.outcome("nav-" + "aa" * 16, first.decision.person_id, "helped", T0 + 2)
    [second] = s.navigation_status([("cc" * 16, "aborted", 30.0)], T0 + 3).decisions
    assert list(s.needs) == ["nav-" + "cc" * 16]
    assert second.decision.evaluation.need.request_id == "nav-" + "cc" * 16


def test_only_the_last_entries_of_an_array_are_looked_at():
    s = session()
    s.people_seen(crowd("p", 3), T0)
    # the one abort sits before the last MAX_GOAL_STATUSES entries: not looked at
    array = [("aa" * 16, "aborted", 5.0)] + statuses(MAX_GOAL_STATUSES, "succeeded", 10.0)
    assert s.navigation_status(array, T0).decisions == []
    assert s.needs == {}
