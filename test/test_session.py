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

"""The help session's rules, one by one, on a MemoryStore (no ROS).

Each expected value follows from the rule as docs/decision.md states it (exact counts and
reason codes); nothing here is computed by the code under test.
"""
from __future__ import annotations

from helpaware_node.core import DecisionConfig, HelpNeed, Result, SiteModel
from helpaware_node.session import HelpSession, SessionInputError, SessionRules, STORE_UNAVAILABLE
from helpaware_node.store import AskEvent, MemoryStore, StoredEvent
import pytest
from session_people import Person

MODEL = SiteModel()
# asking always pays here (no interruption cost, a costly need), so the limits decide
CONFIG = DecisionConfig(interruption_weight_s=0.0, min_reask_interval_s=900.0,
                        max_asks_per_person_per_day=3, max_asks_per_hour=12)
T0 = 100_000.0


STAFF = [Person("ann", 1.0), Person("bo", 2.0), Person("cy", 3.0)]


def session(store=None, rules=SessionRules(), config=CONFIG, now_s=T0, **kw):
    store = store if store is not None else MemoryStore(robot_id="r1")
    return HelpSession(store, MODEL, config, rules, now_s=now_s, **kw)


def need(rid="n1", t=T0):
    return HelpNeed(rid, "handover", t, urgency=1.0)


def only(step):
    [out] = step.decisions
    return out.decision


def excluded(decision):
    return {r["person_id"]: r["excluded"] for r in decision.rationale()}


def test_decides_again_after_decline_and_no_response_up_to_the_need_limit():
    s = session(rules=SessionRules(max_asks_per_need=3))
    s.people_seen(STAFF, T0)
    first = only(s.need_opened(need(), T0))
    s.people_seen(STAFF, T0 + 5)                         # still in view
    second = only(s.outcome("n1", first.person_id, "declined", T0 + 5))
    s.people_seen(STAFF, T0 + 10)
    third = only(s.outcome("n1", second.person_id, Result.NO_RESPONSE, T0 + 10))
    assert [d.action for d in (first, second, third)] == ["ask"] * 3
    assert len({first.person_id, second.person_id, third.person_id}) == 3
    assert excluded(third)[first.person_id] == "reask_interval"
    s.people_seen(STAFF, T0 + 15)
    last = only(s.outcome("n1", third.person_id, "declined", T0 + 15))
    assert last.action == "continue" and last.policy == "need_ask_limit"
    assert s.needs["n1"].asks == 3 and s.pending == {}


def test_helped_ends_the_asking_for_the_need():
    s = session()
    s.people_seen(STAFF, T0)
    d = only(s.need_opened(need(), T0))
    step = s.outcome("n1", d.person_id, "helped", T0 + 5)
    assert step.decisions == [] and s.needs["n1"].served
    assert [e.result for e in step.share] == [Result.HELPED]
    assert s.tick(T0 + 1000).decisions == []            # no decision for a served need


def test_one_pending_ask_per_need_and_the_timeout_decides_again():
    s = session(rules=SessionRules(pending_ask_timeout_s=30.0))
    s.people_seen(STAFF, T0)
    d = only(s.need_opened(need(), T0))
    assert s.tick(T0 + 29.0).decisions == []            # still pending: no second ask
    assert list(s.pending) == ["n1"]
    s.people_seen(STAFF, T0 + 30.0)
    again = only(s.tick(T0 + 30.0))
    assert s.expired_asks == 1 and again.action == "ask" and again.person_id != d.person_id
    assert s.memory.records[s.store.key_for(d.person_id)].belief.a == MODEL.prior_a  # no evidence
    with pytest.raises(SessionInputError, match="person_id: the pending ask"):
        s.outcome("n1", d.person_id, "helped", T0 + 31.0)      # the expired one


def test_outcomes_for_unknown_finished_or_misdirected_asks_are_refused_by_field():
    s = session()
    s.people_seen(STAFF, T0)
    with pytest.raises(SessionInputError, match="request_id"):
        s.outcome("nope", "ann", "helped", T0)
    d = only(s.need_opened(need(), T0))
    other = next(p.person_id for p in STAFF if p.person_id != d.person_id)
    with pytest.raises(SessionInputError, match="person_id"):
        s.outcome("n1", other, "helped", T0 + 1)
    assert "n1" in s.pending                             # refused: nothing changed
    with pytest.raises(SessionInputError, match="result"):
        s.outcome("n1", d.person_id, "maybe", T0 + 1)
    assert "n1" in s.pending
    s.outcome("n1", d.person_id, "helped", T0 + 2)
    with pytest.raises(SessionInputError, match="request_id"):
        s.outcome("n1", d.person_id, "helped", T0 + 3)  # finished
    with pytest.raises(SessionInputError, match="request_id: 'n1' is already open"):
        s.need_opened(need(), T0 + 4)


def test_at_most_max_open_needs_the_oldest_goes():
    s = session(rules=SessionRules(max_open_needs=3))
    for i in range(4):
        s.need_opened(need(f"n{i}"), T0 + i)
    assert list(s.needs) == ["n1", "n2", "n3"]
    assert "closed" in s.need_closed("n0", "closed").notes[0].text   # unknown now: noted


def test_the_ask_is_stored_before_the_decision_and_a_refusal_means_nobody_is_asked():
    store = MemoryStore(robot_id="r1")
    s = session(store)
    s.people_seen(STAFF, T0)
    step = s.need_opened(need(), T0)
    [out] = step.decisions
    assert out.ask is not None and store.asks(request_id="n1") == [out.ask] == step.share
    assert out.ask.person_key == store.key_for(out.decision.person_id)

    def refuse(asks):
        raise OSError("database or disk is full")
    store.append_asks = refuse
    step = s.need_opened(need("n2"), T0 + 1)
    d = only(step)
    assert d.action == "continue" and d.policy == STORE_UNAVAILABLE
    assert "n2" not in s.pending and step.share == []
    assert s.robot_ask_times_s == [T0] and not s.status.ok and "full" in s.status.error
    assert any(n.level == "error" and "append (ask)" in n.text for n in step.notes)


def test_an_outcome_waiting_for_the_store_pauses_asking():
    class Holding:
        waiting = 1

        def write(self, event):
            return None

        def drop_person(self, key):
            pass
    s = session(writer=Holding())
    s.people_seen(STAFF, T0)
    d = only(s.need_opened(need(), T0))
    assert d.action == "continue" and d.policy == STORE_UNAVAILABLE


def test_a_store_that_cannot_be_read_asks_nobody():
    store = MemoryStore(robot_id="r1")
    s = session(store)
    s.people_seen(STAFF, T0)

    def broken(key):
        raise OSError("disk I/O error")
    store.is_opted_out = broken
    d = only(s.need_opened(need(), T0))
    assert d.action == "continue" and d.policy == STORE_UNAVAILABLE
    assert set(excluded(d).values()) == {"opted_out"}   # unread people are never eligible


def test_could_not_ask_stores_nothing_and_frees_the_person_in_memory():
    store = MemoryStore(robot_id="r1")
    s = session(store, rules=SessionRules(max_asks_per_need=3))
    s.people_seen([STAFF[0]], T0)
    only(s.need_opened(need(), T0))
    s.people_seen([STAFF[0]], T0 + 5)
    again = only(s.outcome("n1", "ann", "could_not_ask", T0 + 5))
    assert store.keys() == [] and s.could_not_ask == 1
    assert again.action == "ask" and again.person_id == "ann"   # the ask never reached her
    # the stored ask stays: after a restart it counts (the stricter side)
    assert len(store.asks(person_key=store.key_for("ann"))) == 2


def test_a_restart_counts_the_asks_made_before_it():
    store = MemoryStore(robot_id="r1")
    s = session(store, rules=SessionRules(max_asks_per_need=2))
    s.people_seen(STAFF, T0)
    d = only(s.need_opened(need(), T0))                  # asked, no outcome: then a crash
    again = session(store, now_s=T0 + 60, rules=SessionRules(max_asks_per_need=1))
    assert again.robot_ask_times_s == [T0]
    again.people_seen(STAFF, T0 + 60)
    after = only(again.need_opened(need("n2"), T0 + 60))
    assert excluded(after)[d.person_id] == "reask_interval" and after.action == "ask"
    # the same need re-opened after the restart: its ask before the crash counts
    renewed = only(again.need_opened(need("n1"), T0 + 61))
    assert renewed.action == "continue" and renewed.policy == "need_ask_limit"
    assert only(again.need_opened(need("n3"), T0 + 62)).action == "ask"   # a new need may


def test_the_hourly_cap_holds_across_a_restart():
    store = MemoryStore(robot_id="r1")
    config = DecisionConfig(interruption_weight_s=0.0, max_asks_per_hour=2,
                            min_reask_interval_s=0.0, max_asks_per_person_per_day=100)
    s = session(store, config=config)
    for i in range(2):
        s.people_seen(STAFF, T0 + i)
        assert only(s.need_opened(need(f"a{i}"), T0 + i)).action == "ask"
    again = session(store, config=config, now_s=T0 + 600)
    again.people_seen(STAFF, T0 + 600)
    d = only(again.need_opened(need("b"), T0 + 600))
    assert d.action == "continue" and set(excluded(d).values()) == {"robot_hourly_cap"}
    later = session(store, config=config, now_s=T0 + 3601)   # the hour has passed
    later.people_seen(STAFF, T0 + 3601)
    assert only(later.need_opened(need("c"), T0 + 3601)).action == "ask"


@pytest.mark.parametrize("count_peers", [True, False])
def test_peers_asks_count_for_the_person_but_never_for_the_hourly_cap(count_peers):
    store = MemoryStore(robot_id="r1")
    config = DecisionConfig(interruption_weight_s=0.0, max_asks_per_hour=1)
    s = session(store, config=config, rules=SessionRules(count_peer_asks=count_peers))
    s.people_seen([STAFF[0]], T0)
    s.memory.record_for(store.key_for("ann"))             # held before the peer's ask
    peer = [AskEvent("r2/1", store.key_for("ann"), T0 - 60.0, "door", "p-1"),
            AskEvent("r2/2", store.key_for("bo"), T0 - 60.0, "door", "p-2")]
    assert s.peer_events(peer) == peer
    s.people_seen(STAFF[:2], T0)                          # bo's record loads from the store
    d = only(s.need_opened(need(), T0))
    if count_peers:
        assert excluded(d) == {"ann": "reask_interval", "bo": "reask_interval"}
        assert d.action == "continue"
    else:
        assert d.action == "ask" and d.person_id == "ann"   # and the peer's asks did not cap
    # the ask load counts the peer's ask only when peers count: 2^(-60/1800) at 60 s
    rows = {r["person_id"]: r for r in d.rationale()}
    assert rows["ann"]["ask_load"] == (pytest.approx(2 ** (-60 / 1800)) if count_peers else 0.0)


def test_turning_the_peer_rule_off_and_on_reloads_the_histories():
    store = MemoryStore(robot_id="r1")
    s = session(store)
    key = store.key_for("ann")
    s.peer_events([AskEvent("r2/1", key, T0 - 60.0, "door", "p-1")])
    assert s.memory.record_for(key).ask_times_s == (T0 - 60.0,)
    s.set_parameters(MODEL, CONFIG, SessionRules(count_peer_asks=False))
    assert s.memory.records[key].ask_times_s == ()
    s.set_parameters(MODEL, CONFIG, SessionRules(count_peer_asks=True))
    assert s.memory.records[key].ask_times_s == (T0 - 60.0,)


def test_a_forward_jump_of_system_time_moves_every_remembered_ask_in_memory_and_store():
    store = MemoryStore(robot_id="r1")
    s = session(store)
    s.clock(T0, steady_s=50.0)
    s.people_seen(STAFF, T0)
    d = only(s.need_opened(need(), T0))
    jump = 2 * 86_400.0
    step = s.clock(T0 + 10.0 + jump, steady_s=60.0)       # 10 s real, 2 days on the wall
    assert s.clock_jumps_forward == 1 and step.notes[0].level == "warning"
    assert s.robot_ask_times_s == [T0 + jump]
    key = store.key_for(d.person_id)
    assert s.memory.records[key].ask_times_s == (T0 + jump,)
    assert [a.time_s for a in store.asks(person_key=key)] == [T0 + jump]
    assert s.pending["n1"].asked_at_s == T0 + jump
    # a restart after the jump sees the ask 10 s old, not two days
    again = session(store, now_s=T0 + 20.0 + jump)
    assert again.robot_ask_times_s == [T0 + jump]


def test_sim_time_is_not_followed_and_never_decides_at_time_zero():
    s = session(now_s=0.0)
    s.clock(5.0, steady_s=None)
    s.clock(5.0 + 86_400.0, steady_s=None)                 # a sim clock leaping: the truth
    assert s.clock_jumps_forward == 0
    s.people_seen(STAFF, 0.0)
    assert s.need_opened(need(t=0.0), 0.0).decisions == []
    assert s.needs["n1"].waiting_for_clock
    s.people_seen(STAFF, 7.0)
    d = only(s.tick(7.0))
    assert d.evaluation.need.opened_at_s == 7.0 and d.action == "ask"


def test_navigation_abort_opens_one_need_and_success_resolves_it():
    s = session()
    s.people_seen(STAFF, T0)
    first = s.goal_aborted("ab" * 16, T0)
    assert only(first).evaluation.need.kind == "navigation_failure"
    assert s.goal_aborted("ab" * 16, T0 + 1).decisions == []       # repeated status
    s.goal_finished("ab" * 16)
    assert s.needs == {}


def test_forgotten_person_loses_record_pending_ask_and_held_outcome():
    dropped = []

    class Writer:
        waiting = 0

        def write(self, event):
            return True

        def drop_person(self, key):
            dropped.append(key)
    store = MemoryStore(robot_id="r1")
    s = session(store, writer=Writer())
    s.people_seen([STAFF[0]], T0)
    only(s.need_opened(need(), T0))
    key = store.key_for("ann")
    s.forgotten(key)
    assert key not in s.memory.records and s.pending == {} and dropped == [key]


def test_person_records_stay_bounded_and_keep_who_the_limits_need():
    store = MemoryStore(robot_id="r1")
    s = session(store, rules=SessionRules(max_people_in_memory=10))
    s.people_seen([STAFF[0]], T0)
    only(s.need_opened(need(), T0))                        # ann asked: pending, then answered
    s.outcome("n1", "ann", "declined", T0 + 1)
    for i in range(30):                                    # strangers, long gone
        s.memory.record_for(store.key_for(f"visitor-{i}"))
    s.people_seen([Person("bo")], T0 + 9_000.0)            # bo in view, asked: pending
    assert only(s.need_opened(need("n2", T0 + 9_000.0), T0 + 9_000.0)).person_id == "bo"
    s.tick(T0 + 9_000.0)
    keys = set(s.memory.records)
    assert len(keys) <= 10 and s.memory.evicted >= 20
    assert store.key_for("ann") in keys and store.key_for("bo") in keys
    # an evicted person comes back whole from the store
    gone = next(k for k in (store.key_for(f"visitor-{i}") for i in range(30)) if k not in keys)
    store.append(StoredEvent("r9/1", gone, T0, Result.HELPED, 0.0, 0.0))
    assert s.memory.record_for(gone).belief.a == MODEL.prior_a + 1.0


def test_asking_disabled_always_continues_with_its_policy():
    s = session(rules=SessionRules(asking_enabled=False))
    s.people_seen(STAFF, T0)
    d = only(s.need_opened(need(), T0))
    assert d.action == "continue" and d.policy == "asking_disabled" and s.pending == {}


def test_a_need_decided_again_counts_each_candidate_once():
    """candidate_count is 'help needs where the person was a candidate' (core.person).

    a need decided three times (two declines) adds one per person, not three.
    """
    s = session(rules=SessionRules(max_asks_per_need=3))
    s.people_seen(STAFF, T0)
    d = only(s.need_opened(need(), T0))
    s.people_seen(STAFF, T0 + 1)
    d = only(s.outcome("n1", d.person_id, "declined", T0 + 1))
    s.people_seen(STAFF, T0 + 2)
    only(s.outcome("n1", d.person_id, "declined", T0 + 2))
    counts = {p.person_id: s.memory.records[s.store.key_for(p.person_id)].candidate_count
              for p in STAFF}
    assert counts == {"ann": 1, "bo": 1, "cy": 1}
    s.people_seen(STAFF, T0 + 3)
    s.need_opened(need("n2", T0 + 3), T0 + 3)
    assert s.memory.records[s.store.key_for("ann")].candidate_count == 2
