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
    assert vars(note_candidate(rec, now)) == vars(want)     # every field, none missing or extra


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


# ---- the second round of shortcuts (issue 16, the decision's ratio to a bare relay): each
# against the general code it replaces, written out here as it was

def reference_information_value(a, b, c, model, config, help_time_s):
    """Return the VOI as first written: declined_moments' mean and typical_gain of each mean."""
    from helpaware_node.core.belief import declined_moments
    from helpaware_node.core.policy import typical_gain
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    m = a / (a + b)
    p = c * m
    m_declined, _ = declined_moments(a, b, c)

    def u(x):
        return typical_gain(x, model, config, help_time_s)
    return np.maximum(p * u((a + 1.0) / (a + b + 1.0)) + (1.0 - p) * u(m_declined) - u(m), 0.0)


BELIEF_SIDE = st.one_of(st.floats(1e-300, 1e12), st.sampled_from([5e-324, 1e-3, 1.0, 1e12]))
FACTOR = st.one_of(st.floats(0.0, 1.0), st.sampled_from([0.0, 1.0, 5e-324, 1.0 - 2**-53]))


@settings(max_examples=300, deadline=None)
@given(ab=st.lists(st.tuples(BELIEF_SIDE, BELIEF_SIDE, FACTOR), min_size=1, max_size=8),
       k_busy=st.sampled_from([0.0, 0.7, 3.0]), help_time_s=st.sampled_from([5.0, 30.0]))
def test_declined_mean_and_the_voi_are_bit_for_bit_the_general_forms(ab, k_busy, help_time_s):
    from helpaware_node.core.belief import declined_mean, declined_moments
    from helpaware_node.core.policy import information_value
    a, b, c = (np.array(v, dtype=float) for v in zip(*ab))
    with np.errstate(all="ignore"):
        want_mean, _ = declined_moments(a, b, c)
        model, config = SiteModel(k_busy=k_busy), DecisionConfig()
        want = reference_information_value(a, b, c, model, config, help_time_s)
    assert declined_mean(a, b, c).tobytes() == want_mean.tobytes()
    with np.errstate(all="ignore"):
        got = information_value(a, b, c, model, config, help_time_s)
    assert got.tobytes() == want.tobytes()


def reference_limit(cand, x, now_s, config, robot_capped):
    """Return the first hard limit one candidate meets, checked in Exclusion order."""
    from helpaware_node.core.person import DAY_S
    from helpaware_node.core.policy import Exclusion as E
    checks = [
        (E.OPTED_OUT, cand.opted_out),
        (E.PROTECTED_ACTIVITY,
         bool(cand.activity) and cand.activity in config.protected_activities),
        (E.STALE_OBSERVATION, now_s - cand.observed_at_s > config.max_observation_age_s),
        (E.TOO_FAR, cand.distance_m > config.max_distance_m),
        (E.TOO_BUSY, x >= config.busyness_limit),
        (E.REASK_INTERVAL, any(now_s - t < config.min_reask_interval_s for t in cand.ask_times_s)),
        (E.PERSON_DAILY_CAP, sum(now_s - t < DAY_S for t in cand.ask_times_s)
         >= config.max_asks_per_person_per_day),
        (E.ROBOT_HOURLY_CAP, robot_capped)]
    return next((e for e, hit in checks if hit), None)


CANDIDATE_FIELDS = st.tuples(
    st.floats(0.0, 10.0), st.floats(0.0, 10.0), st.one_of(st.none(), st.floats(0.0, 1.0)),
    st.sampled_from(["", "charting", "with_patient"]),
    st.lists(st.floats(-2e5, 1.1e5), max_size=4), st.booleans())


@settings(max_examples=300, deadline=None)
@given(people=st.lists(CANDIDATE_FIELDS, max_size=6), day_cap=st.integers(0, 3),
       reask_s=st.sampled_from([0.0, 600.0]), robot_asks=st.integers(0, 3),
       busy_limit=st.sampled_from([0.5, 1.0]), max_age_s=st.sampled_from([0.0, 5.0]))
def test_the_limits_loop_gives_each_candidates_first_limit(people, day_cap, reask_s, robot_asks,
                                                           busy_limit, max_age_s):
    from helpaware_node.core.policy import evaluate
    now = 1e5
    config = DecisionConfig(max_asks_per_person_per_day=day_cap, min_reask_interval_s=reask_s,
                            max_asks_per_hour=2, busyness_limit=busy_limit,
                            max_observation_age_s=max_age_s)
    model = SiteModel()
    cands = [Candidate(f"p{i}", d, now - age, Belief(1.0, 1.0), busyness=x, activity=act,
                       ask_times_s=tuple(sorted(times)), opted_out=out)
             for i, (d, age, x, act, times, out) in enumerate(people)]
    robot = tuple(now - 10.0 * k for k in range(robot_asks))
    ev = evaluate(HelpNeed("r", "door", now), cands, now, robot, model, config)
    capped = robot_asks >= config.max_asks_per_hour
    want = [reference_limit(c, model.default_busyness if c.busyness is None else c.busyness,
                            now, config, capped) for c in cands]
    assert list(ev.exclusions) == want
    # the context factor without its checks is context_factor's arithmetic, bit for bit
    from helpaware_node.core.context import context_factor
    want_c = np.asarray(context_factor(ev.busyness, ev.ask_load, model.k_busy, model.k_load),
                        dtype=float).reshape(len(cands))
    assert ev.c.tobytes() == want_c.tobytes()


def test_a_nan_ask_time_is_still_named_by_the_context_factor():
    cand = Candidate("q", 1.0, 1.0, Belief(1.0, 1.0), ask_times_s=(math.nan,))
    with pytest.raises(CoreInputError, match="ask load: nan"):
        decide(HelpNeed("x", "door", 1.0), [cand], 2.0, (), SiteModel(), DecisionConfig())


@settings(max_examples=300, deadline=None)
@given(rate=st.lists(st.sampled_from([0.0, 0.0, 1e-4, 3e-3]), min_size=0, max_size=5),
       alpha=st.floats(0.0, 50.0), beta=st.floats(0.0, 50.0), load=st.floats(0.0, 3.0),
       horizon_s=st.sampled_from([0.0, 3600.0]))
def test_the_lasting_costs_early_exit_gives_the_general_zeros(rate, alpha, beta, load,
                                                              horizon_s):
    from helpaware_node.core.lasting import lasting_cost
    got = lasting_cost(np.array(rate, dtype=float), alpha, beta, 0.5, 0.3, load, 3600.0,
                       1800.0, horizon_s)
    assert got.shape == (len(rate),) and got.dtype == np.float64
    if horizon_s <= 0.0 or not any(r > 0.0 for r in rate) or not alpha > beta:
        assert not got.any()     # nobody live: zeros, as the general path gives
    # beside one live entry (the general path throughout), the others are unchanged
    both = lasting_cost(np.array(rate + [3e-3], dtype=float),
                        np.array([alpha] * len(rate) + [beta + 1.0]), beta, 0.5, 0.3, load,
                        3600.0, 1800.0, horizon_s)
    assert both[:-1].tobytes() == got.tobytes()


@settings(max_examples=400, deadline=None)
@given(d=NUMBERS, t=NUMBERS, x=NUMBERS, count=st.integers(0, 50),
       first=st.one_of(st.none(), st.floats(0.0, 1e6)), out=st.booleans(),
       asks=st.lists(st.floats(0.0, 1e6), max_size=3))
def test_candidate_from_record_is_the_constructors_candidate(d, t, x, count, first, out, asks):
    from helpaware_node.core.person import belief_at
    from helpaware_node.core.policy import candidate_from_record
    model = SiteModel()
    rec = PersonRecord(Belief(2.0, 3.0), 10.0, tuple(asks), count, first)
    try:
        want = Candidate("ann", d, t, belief_at(rec, 100.0, model), busyness=x,
                         activity="charting", ask_times_s=tuple(asks), candidate_count=count,
                         first_seen_s=first, opted_out=out)
    except CoreInputError as exc:
        with pytest.raises(CoreInputError) as got:
            candidate_from_record("ann", rec, 100.0, model, d, t, busyness=x,
                                  activity="charting", opted_out=out)
        assert str(got.value) == str(exc)
        return
    got = candidate_from_record("ann", rec, 100.0, model, d, t, busyness=x,
                                activity="charting", opted_out=out)
    assert got == want and hash(got) == hash(want)
    assert vars(got) == vars(want)           # every field, none missing or extra
    with pytest.raises(dataclasses.FrozenInstanceError):
        got.distance_m = 1.0


def strict_parse(text):
    """parse_json's verdict on `text` by the standard library alone (orjson switched off)."""
    with pytest.MonkeyPatch.context() as m:
        m.setattr(wire, "orjson", None)
        try:
            return "value", repr(wire.parse_json(text))
        except wire.WireError as exc:
            return "error", str(exc)


def verdict(text):
    try:
        return "value", repr(wire.parse_json(text))
    except wire.WireError as exc:
        return "error", str(exc)


JSON_VALUES = st.recursive(
    st.one_of(st.none(), st.booleans(), st.integers(-2**70, 2**70),
              st.floats(allow_nan=False, allow_infinity=False), st.text(max_size=6)),
    lambda inner: st.one_of(st.lists(inner, max_size=3),
                            st.dictionaries(st.text(max_size=3), inner, max_size=3)),
    max_leaves=8)


@pytest.mark.skipif(wire.orjson is None, reason="orjson not installed")
@settings(max_examples=500, deadline=None)
@given(value=JSON_VALUES, spaced=st.booleans(), ascii_only=st.booleans(),
       edit=st.one_of(st.none(), st.tuples(st.integers(0, 200), st.sampled_from(
           ['"a":1,"a":2', "NaN", "Infinity", "1e400", "-0", "1E5", "\\ud800", "\ufeff", "[",
            "}", ",", "\\u00e9", " ", "-", "0.0"]))))
def test_the_fast_reading_gives_the_strict_readings_value_or_error(value, spaced, ascii_only,
                                                                   edit):
    separators = (", ", ": ") if spaced else (",", ":")
    text = json.dumps(value, separators=separators, ensure_ascii=ascii_only)
    if edit is not None:
        at, piece = edit
        at = min(at, len(text))
        text = text[:at] + piece + text[at:]
    assert verdict(text) == strict_parse(text)


@pytest.mark.skipif(wire.orjson is None, reason="orjson not installed")
@pytest.mark.parametrize("text", [
    '{"doc":"task_status","doc":"people"}', '{"a":{"b":1,"b":2}}', "[NaN]", '{"a":-Infinity}',
    "[1e400]", '"\\ud800"', "123456789012345678901234567890", "[" * 480 + "]" * 480,
    '{"doc":"task_status","version":1,"request_id":"a","state":"open","kind":"door"}'])
def test_the_fast_reading_on_the_strict_readings_hard_cases(text):
    assert verdict(text) == strict_parse(text)


def test_task_status_documents_are_read_the_fast_way():
    # the shortcut must take the usual document, or it would not pay
    text = wire.task_status_document("need-1", "open", "door", urgency=0.5)
    assert len(text) <= wire.FAST_PARSE_MAX_CHARS
    assert wire.orjson is None or wire._fast_parse(text) is not wire._UNSETTLED


@settings(max_examples=200, deadline=None)
@given(people=st.lists(st.tuples(st.text(min_size=1, max_size=20), st.text(max_size=10),
                                 st.integers(0, 5)), max_size=6))
def test_the_one_pass_quick_bound_is_the_sum_of_the_quick_bounds(people):
    cands = [Candidate(pid, 1.0, 1.0, Belief(1.0, 1.0), activity=act,
                       ask_times_s=tuple(float(k) for k in range(asks)))
             for pid, act, asks in people]
    assert wire.candidates_bytes_bound_quick(cands) == sum(
        wire.candidate_bytes_bound(c, quick=True) for c in cands)
