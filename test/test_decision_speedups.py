"""The decision path's shortcuts give what the general code gives, for every input.

Each shortcut (the speed issue: profiled in bench/bench_node.py) is checked against the
general path it stands in for: the field-by-field check (`check_range`, `wire._check`), the
standard library's JSON writer, `dataclasses.replace`, and the per-entry float conversions the
rationale used before. These are equivalences, so no outside reference is needed beyond
Python's own `json` module (the decoder both texts go through).
"""
from __future__ import annotations

import dataclasses
import json
import math

from helpaware_node import wire
from helpaware_node.core import (
    Belief,
    Candidate,
    CoreInputError,
    DecisionConfig,
    HelpNeed,
    SiteModel,
)
from helpaware_node.core.model import check_range
from helpaware_node.core.person import note_candidate, PersonRecord
from helpaware_node.core.policy import decide
from helpaware_node.session import HelpSession, SessionRules
from helpaware_node.store import MemoryStore
from hypothesis import given, settings, strategies as st
import numpy as np
import pytest
from session_people import Person

NUMBERS = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.integers(-3, 3),
                    st.booleans(), st.none(), st.text(max_size=2),
                    st.sampled_from([0.0, -0.0, 1.0, 1e6, 1e6 + 1, -1e15, 1e15, 5e-324]))


def general_candidate_error(pid, d, t, x):
    """Return what the field-by-field check says of these values (None: all in range)."""
    try:
        check_range(f"distance_m of {pid}", d, 0.0, 1e6)
        check_range(f"observed_at_s of {pid}", t, -1e15, 1e15)
        if x is not None:
            check_range(f"busyness of {pid}", x, 0.0, 1.0)
    except CoreInputError as exc:
        return str(exc)
    return None


@settings(max_examples=400, deadline=None)
@given(d=NUMBERS, t=NUMBERS, x=NUMBERS)
def test_candidate_accepts_and_refuses_exactly_as_check_range(d, t, x):
    want = general_candidate_error("ann", d, t, x)
    try:
        Candidate("ann", d, t, Belief(1.0, 1.0), busyness=x)
        got = None
    except CoreInputError as exc:
        got = str(exc)
    assert got == want


PERSON_VALUES = st.fixed_dictionaries(
    {"id": st.one_of(st.text(min_size=0, max_size=130), st.integers(), st.none())},
    optional={"distance_m": NUMBERS, "busyness": NUMBERS,
              "activity": st.one_of(st.text(max_size=70), st.none(), st.integers()),
              "position": st.one_of(st.lists(NUMBERS, max_size=4), st.none(), st.text()),
              "extra": st.integers()})


@settings(max_examples=600, deadline=None)
@given(person=PERSON_VALUES)
def test_the_one_pass_person_check_never_accepts_what_the_field_check_refuses(person):
    """`_plain_person` True must mean `_check(PERSON)` passes.

    Where it says False, decoding still gives the field check's verdict and message (the generic
    path runs).
    """
    try:
        wire._check(wire.PERSON, person, "people[0]")
        valid = True
    except wire.WireError:
        valid = False
    if wire._plain_person(person):
        assert valid
    doc = {"doc": "people", "version": 1, "stamp_s": 1.0, "people": [person]}
    try:
        wire.validate("people", doc)
        accepted = True
    except wire.WireError as exc:
        accepted = False
        assert str(exc).startswith("people[0]")       # the field check names the entry
    assert accepted == valid


def test_plain_people_are_settled_in_one_pass():
    # the usual perception output: every entry takes the shortcut (else it would not pay)
    people = [{"id": f"p{i}", "distance_m": 1.5 + i, "busyness": 0.25, "activity": "charting",
               "position": [1.0, 2.0, 0.0]} for i in range(5)] + [{"id": "q", "distance_m": 3}]
    assert all(wire._plain_person(p) for p in people)


def a_decision(n=30, seed=0):
    rng = np.random.default_rng(seed)
    cands = [Candidate(f"p{i}é" if i % 7 == 0 else f"p{i}", float(rng.uniform(0, 8)), 990.0,
                       Belief(float(rng.uniform(0.5, 5)), float(rng.uniform(0.5, 5))),
                       busyness=None if i % 5 == 0 else float(rng.random()),
                       activity="charting", ask_times_s=(100.0, 500.0) if i % 3 == 0 else (),
                       candidate_count=i, first_seen_s=10.0 * i)
             for i in range(n)]
    return decide(HelpNeed("n1", "door", 900.0, urgency=0.5), cands, 1000.0, (400.0,),
                  SiteModel(), DecisionConfig())


@pytest.mark.parametrize("seed", range(4))
def test_the_fast_writer_gives_the_standard_librarys_document(seed):
    decision = a_decision(seed=seed)
    model, config = SiteModel(), DecisionConfig()
    doc = wire.decision_to_document(decision, (400.0,), None, None, "r1", check=False)
    assert wire.evaluation_is_finite(decision)
    fast = wire.fast_text(doc, model, config, finite=True)
    plain = wire.fast_text(doc, model, config, finite=False)
    assert json.loads(fast) == json.loads(plain)
    # never longer: the byte bounds of the session (_within_one_document) hold for both
    assert len(fast.encode("utf-8")) <= len(plain.encode("utf-8"))
    # and a valid decision document by the schema table, replayable
    wire.validate("decision", json.loads(fast))


@pytest.mark.parametrize("field", ["a", "mean", "voi_s", "lasting_cost_s", "score_s"])
@pytest.mark.parametrize("bad", [math.nan, math.inf])
def test_a_non_finite_number_is_refused_not_written_as_null(field, bad):
    decision = a_decision(5)
    ev = decision.evaluation
    arr = getattr(ev, field).copy()
    arr[2] = bad
    broken = dataclasses.replace(decision, evaluation=dataclasses.replace(ev, **{field: arr}))
    assert not wire.evaluation_is_finite(broken)
    doc = wire.decision_to_document(broken, (), None, None, "r1", check=False)
    with pytest.raises(ValueError):
        wire.fast_text(doc, finite=wire.evaluation_is_finite(broken))


def test_the_rationale_holds_the_evaluations_numbers_as_plain_floats():
    decision = a_decision(12)
    ev = decision.evaluation
    rows = decision.rationale()
    names = ["a", "b", "mean", "busyness", "ask_load", "c", "p", "interruption_s",
             "advantage_s", "voi_s", "future_requests", "lasting_cost_s", "score_s"]
    for i, row in enumerate(rows):
        assert row["person_id"] == ev.candidates[i].person_id
        assert row["excluded"] == (None if ev.exclusions[i] is None else ev.exclusions[i].value)
        assert row["distance_m"] == ev.candidates[i].distance_m
        for name in names:
            assert type(row[name]) is float and row[name] == float(getattr(ev, name)[i])


@given(count=st.integers(0, 10**6), first=st.one_of(st.none(), st.floats(-1e9, 1e9)),
       now=st.floats(-1e9, 1e9))
def test_note_candidate_equals_the_replace_it_stands_for(count, first, now):
    rec = PersonRecord(Belief(2.0, 3.0), 5.0, (1.0, 2.0), count, first)
    want = dataclasses.replace(rec, candidate_count=count + 1,
                               first_seen_s=now if first is None else min(first, now))
    assert note_candidate(rec, now) == want


def test_a_person_still_in_view_keeps_the_key_the_store_gives():
    store = MemoryStore(robot_id="r1")
    session = HelpSession(store, SiteModel(), DecisionConfig(), SessionRules(), now_s=100.0)
    for t in (100.0, 101.0, 102.0):
        session.people_seen([Person("ann", 1.0), Person("bo", 2.0)], t)
        for pid, seen in session.seen.items():
            assert seen.key == store.key_for(pid)
            assert seen.observed_at_s == t


def test_markers_are_updated_in_place_and_people_who_left_are_deleted():
    from helpaware_node.ros.markers import PersonMarkers
    from helpaware_node.session.state import Seen
    from visualization_msgs.msg import Marker

    def seen(*people):
        return {p: Seen(wire.SeenPerson(p, d, 0.2, "", (d, 1.0, 0.0)), f"k-{p}", 1.0, "map")
                for p, d in people}
    Time = type(Marker().header.stamp)       # builtin_interfaces/Time, via the marker
    marks = PersonMarkers()
    first = marks.update(seen(("ann", 1.0), ("bo", 2.0)), lambda k: 0.25, Time(sec=1), 2.0)
    again = marks.update(seen(("ann", 3.0), ("bo", 2.0)), lambda k: 0.75, Time(sec=2), 2.0)
    ann0, ann1 = first.markers[0], again.markers[0]
    assert ann1 is ann0                       # the same message, its fields filled in again
    assert (ann1.text, ann1.header.stamp.sec, ann1.pose.position.x) == ("w=0.75", 2, 3.0)
    assert ann1.pose.position.z == 2.0 and ann1.header.frame_id == "map"
    left = marks.update(seen(("bo", 2.0)), lambda k: 0.5, Time(sec=3), 2.0)
    actions = sorted(m.action for m in left.markers)
    assert actions == [Marker.ADD, Marker.DELETE]
    assert next(m for m in left.markers if m.action == Marker.DELETE).id == ann0.id
    # nobody listening: nothing kept but what the people in view need
    marks.reset(seen(("bo", 2.0)))
    fresh = marks.update(seen(("bo", 2.0)), lambda k: 0.5, Time(sec=4), 2.0)
    assert len(fresh.markers) == 1 and fresh.markers[0].action == Marker.ADD
