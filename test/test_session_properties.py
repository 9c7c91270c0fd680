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

"""Property: no hard limit is ever crossed, across restarts.

Property: over any sequence of session events, with restarts in between (a new session on the same
store), no hard limit is ever crossed.

The driver plays a site: people come and go, needs open and close, outcomes arrive, asks
expire, peers ask, people opt out, the system clock jumps forward or back, and the robot
restarts. Every ask the sessions make is written into an independent ledger kept on the real
(steady) time line, and the ledger is checked by plain counting against the limits as
DESIGN.md section 4 and docs/decision.md state them:
- nobody asked within min_reask_interval_s of an earlier ask of them (this robot's, or a
  peer's while peers count; an ask answered could_not_ask never reached the person);
- at most max_asks_per_person_per_day asks of one person in any 24 h (same asks);
- at most max_asks_per_hour asks by this robot in any hour (its own asks only);
- nobody asked after opting out;
- at most max_asks_per_need asks for one request id, restarts included;
- never a second ask for a need while its first is pending (not answered, not expired) in
  the same run of the robot.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from helpaware_node.core import DecisionConfig, HelpNeed, SiteModel
from helpaware_node.session import HelpSession, SessionRules
from helpaware_node.store import AskEvent, MemoryStore, SqliteStore
from hypothesis import given, settings, strategies as st
from session_people import Person

PEOPLE = ["ann", "bo", "cy", "di", "ed", "fay"]
DAY_S, HOUR_S = 86_400.0, 3600.0
MODEL = SiteModel()
CONFIG = DecisionConfig(interruption_weight_s=0.0, min_reask_interval_s=600.0,
                        max_asks_per_person_per_day=3, max_asks_per_hour=3)
TIMEOUT_S = 120.0


_open = st.tuples(st.just("open"))
_answer = st.tuples(st.just("answer"), st.sampled_from(["helped", "declined", "declined",
                                                        "no_response", "could_not_ask"]))
# opening and answering weigh more: the limits bind only when asks come thick and fast
op_st = st.one_of(
    _open, _open, _open, _answer, _answer, _answer,
    st.tuples(st.just("reopen")),
    st.tuples(st.just("wait"), st.sampled_from([1.0, 30.0, 200.0, 700.0, 3000.0, 20_000.0])),
    st.tuples(st.just("jump"), st.sampled_from([600.0, 7200.0, 2 * DAY_S])),
    st.tuples(st.just("back"), st.sampled_from([60.0, 1800.0, 5 * HOUR_S])),
    st.tuples(st.just("see"), st.sets(st.sampled_from(PEOPLE), min_size=2)),
    st.tuples(st.just("close")),
    st.tuples(st.just("peer"), st.sampled_from(PEOPLE), st.sampled_from([0.0, 300.0, 5000.0])),
    st.tuples(st.just("optout"), st.sampled_from(PEOPLE)),
    st.tuples(st.just("restart")),
)


@dataclass
class Ledger:
    """Every ask, on the real time line: (real time, person, robot, request id or '')."""

    asks: list = field(default_factory=list)
    unreached: set = field(default_factory=set)      # indices of asks answered could_not_ask
    opted_out: set = field(default_factory=set)
    pending: dict = field(default_factory=dict)      # request id -> (real time of the ask)
    breaches: list = field(default_factory=list)

    def own_ask(self, real_s, person, rid, counted_peers):
        earlier = [(t, p, r) for i, (t, p, r, _) in enumerate(self.asks)
                   if i not in self.unreached and p == person
                   and (r == "robot" or counted_peers)]
        if person in self.opted_out:
            self.breaches.append(("opted_out", person, real_s))
        if any(real_s - t < CONFIG.min_reask_interval_s for t, _, _ in earlier):
            self.breaches.append(("reask_interval", person, real_s))
        if sum(1 for t, _, _ in earlier if real_s - t < DAY_S) >= \
                CONFIG.max_asks_per_person_per_day:
            self.breaches.append(("person_daily_cap", person, real_s))
        if sum(1 for t, _, r, _ in self.asks if r == "robot" and real_s - t < HOUR_S) >= \
                CONFIG.max_asks_per_hour:
            self.breaches.append(("robot_hourly_cap", person, real_s))
        if sum(1 for *_, n in self.asks if n == rid) >= RULES.max_asks_per_need:
            self.breaches.append(("need_ask_limit", rid, real_s))
        asked = self.pending.get(rid)
        if asked is not None and real_s - asked < TIMEOUT_S:
            self.breaches.append(("second_pending_ask", rid, real_s))
        self.pending[rid] = real_s
        self.asks.append((real_s, person, "robot", rid))
        return len(self.asks) - 1


RULES = SessionRules(max_asks_per_need=2, pending_ask_timeout_s=TIMEOUT_S)


def play(ops, store, count_peers: bool) -> Ledger:
    """Drive sessions through `ops` as a site would; return the ledger of every ask.

    The behaviour layer here resolves a need as soon as the robot decides to continue or is
    helped, and after a restart may re-send a need it still holds (`reopen`, the same id).
    """
    rules = SessionRules(max_asks_per_need=RULES.max_asks_per_need,
                         pending_ask_timeout_s=TIMEOUT_S, count_peer_asks=count_peers)
    real, node = 1_000.0, 1_000_000.0
    view: set = set(PEOPLE)
    ledger = Ledger()
    ask_index: dict = {}                     # request id -> ledger index of its pending ask
    opened: list = []                        # every request id opened, oldest first
    peer_seq = 0
    session = HelpSession(store, MODEL, CONFIG, rules, now_s=node)

    def feed(step):
        for out in step.decisions:
            rid = out.decision.evaluation.need.request_id
            if out.decision.action == "ask":
                ask_index[rid] = ledger.own_ask(real, out.decision.person_id, rid, count_peers)
            else:
                session.need_closed(rid)     # carry on alone: the need is over

    for op in ops:
        kind = op[0]
        if kind == "wait":
            real, node = real + op[1], node + op[1]
        elif kind == "jump":                 # system time steps ahead; real time barely moves
            real, node = real + 0.1, node + op[1]
        elif kind == "back":
            real, node = real + 0.1, node - op[1]
        elif kind == "restart":              # a crash: a new session on the same store
            session = HelpSession(store, MODEL, CONFIG, rules, now_s=node)
            ledger.pending.clear()
            ask_index.clear()
        session.clock(node, steady_s=real)
        session.people_seen([Person(p, 1.0 + PEOPLE.index(p)) for p in sorted(view)], node)
        if kind == "see":
            view = set(op[1])
            session.people_seen([Person(p, 1.0 + PEOPLE.index(p)) for p in sorted(view)], node)
        elif kind == "open" or (kind == "reopen" and opened):
            rid = f"n{len(opened)}" if kind == "open" else next(
                (r for r in reversed(opened) if r not in session.needs), None)
            if rid is not None:
                if kind == "open":
                    opened.append(rid)
                feed(session.need_opened(HelpNeed(rid, "door", node, urgency=1.0), node))
        elif kind == "close" and session.needs:
            session.need_closed(next(iter(session.needs)))
        elif kind == "answer" and session.pending:
            rid, pending = next(iter(session.pending.items()))
            ledger.pending.pop(rid, None)
            if op[1] == "could_not_ask":
                ledger.unreached.add(ask_index[rid])
            feed(session.outcome(rid, pending.person_id, op[1], node))
            if op[1] == "helped":
                session.need_closed(rid)
        elif kind == "peer":
            peer_seq += 1
            session.peer_events([AskEvent(f"peer/{peer_seq}", store.key_for(op[1]),
                                          node - op[2], "door", f"p{peer_seq}")])
            ledger.asks.append((real - op[2], op[1], "peer", ""))
        elif kind == "optout":
            store.opt_out(store.key_for(op[1]))
            ledger.opted_out.add(op[1])
        before = set(session.pending)
        feed(session.tick(node))             # housekeeping: expiries decide again
        for rid in before - set(session.pending):
            ledger.pending.pop(rid, None)    # expired: asking again is allowed
    return ledger


@settings(max_examples=400)
@given(st.lists(op_st, min_size=20, max_size=80), st.booleans())
def test_no_hard_limit_is_ever_crossed_across_restarts(ops, count_peers):
    ledger = play(ops, MemoryStore(robot_id="robot"), count_peers)
    assert ledger.breaches == []


@settings(max_examples=25)
@given(st.lists(op_st, min_size=20, max_size=60), st.booleans())
def test_no_hard_limit_is_crossed_on_the_sqlite_store(tmp_path_factory, ops, count_peers):
    path = tmp_path_factory.mktemp("prop") / "b.sqlite3"
    store = SqliteStore(path, "robot", b"p" * 32, model=MODEL)
    try:
        ledger = play(ops, store, count_peers)
    finally:
        store.close()
    assert ledger.breaches == []


def test_the_ledger_catches_each_breach():
    """The checker itself can fail: a hand-made history breaking each limit once."""
    ledger = Ledger()
    ledger.own_ask(0.0, "ann", "n1", True)
    ledger.own_ask(10.0, "ann", "n2", True)                # re-ask 10 s later
    ledger.own_ask(10.0, "bo", "n1", True)                 # second pending ask of n1
    ledger.own_ask(20.0, "cy", "n1", True)                 # third ask for n1 (and pending)
    for t in (700.0, 1400.0):
        ledger.own_ask(t, "ann", f"m{t}", True)            # ann's 4th and 5th in a day
    ledger.opted_out.add("di")
    ledger.own_ask(2000.0, "di", "d1", True)
    kinds = {b[0] for b in ledger.breaches}
    assert kinds == {"reask_interval", "second_pending_ask", "need_ask_limit",
                     "person_daily_cap", "robot_hourly_cap", "opted_out"}
