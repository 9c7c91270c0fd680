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

"""wire.py: documents, field-named errors, exact replay, and agreement with the schema files.

The committed docs/schemas/*.json are checked with the `jsonschema` library (an implementation
of the JSON Schema standard, draft 2020-12, which the schemas declare), so the check does not
depend on our own code.
"""
import copy
import json
import os
import random

from document_paths import field_paths, replaced
from helpaware_node import wire
from helpaware_node.core import decide, DecisionConfig, HelpNeed, SiteModel
from helpaware_node.core.belief import Belief
from helpaware_node.core.policy import Candidate
from hypothesis import given, strategies as st
import jsonschema
import pytest

SCHEMA_DIR = os.path.join(os.path.dirname(__file__), "..", "docs", "schemas")
DRAFT_2020_12 = "https://json-schema.org/draft/2020-12/schema"


def _no_constant(name):
    raise ValueError(f"{name} is not JSON")


def schema_ok(schema, doc) -> bool:
    """Would a standard validator accept this document as it travels, as JSON text.

    NaN and infinities are not JSON (RFC 8259), so a document holding one is refused before any
    schema sees it, as a strict JSON parser refuses it.
    """
    try:
        value = json.loads(json.dumps(doc), parse_constant=_no_constant)
    except ValueError:
        return False
    return jsonschema.Draft202012Validator(schema).is_valid(value)


def load_schema(name):
    with open(os.path.join(SCHEMA_DIR, f"{name}.json")) as fh:
        return json.load(fh)


# --- valid examples ---------------------------------------------------------------------
def sample_decision_doc(seed=3):
    rng = random.Random(seed)
    model, config = SiteModel(), DecisionConfig()
    need = HelpNeed("req-1", "elevator", 100.0, urgency=0.4)
    cands = [Candidate(f"p{i}", rng.uniform(0.5, 9.0), 100.0 - rng.uniform(0, 4),
                       Belief(rng.uniform(0.5, 9), rng.uniform(0.5, 9)),
                       busyness=rng.choice([None, rng.random()]),
                       activity=rng.choice(["", "charting", "with_patient"]),
                       ask_times_s=(rng.uniform(-5000, 99),), candidate_count=rng.randint(0, 9),
                       first_seen_s=rng.choice([None, 0.0]), opted_out=rng.random() < 0.2)
             for i in range(4)]
    d = decide(need, cands, 101.0, [90.0, -9000.0], model, config)
    return wire.decision_to_document(d, [90.0, -9000.0], model, config, "robot-a")


def valid_documents():
    return {
        "people": json.loads(wire.people_document(
            [{"id": "a", "distance_m": 2.0, "busyness": 0.3, "activity": "charting",
              "position": [1.0, 2.0, 0.0]}, {"id": "b", "distance_m": 4.5, "busyness": None}],
            12.5, frame_id="map")),
        "task_status": json.loads(wire.task_status_document("r1", "open", "door", 0.2,
                                                            continue_cost_s=80.0, stamp_s=3.0)),
        "outcome": json.loads(wire.outcome_document("r1", "a", "helped", stamp_s=4.0)),
        "decision": sample_decision_doc(),
    }


def _drop(doc, path):
    d = copy.deepcopy(doc)
    cur = d
    for p in path[:-1]:
        cur = cur[p]
    del cur[path[-1]]
    return d


REPLACEMENTS = [None, "", "x", "x" * 300, -1, 0, 0.5, 1, 2, 1e16, -1e16, float("nan"),
                float("inf"), True, [], [1, 2, 3], {}, {"zz": 1}, "open", "ask", "helped", 1.5]


def mutants(doc):
    for path in field_paths(doc, items_per_list=2):
        for r in REPLACEMENTS:
            yield replaced(doc, path, r)
        if path and isinstance(path[-1], str):
            yield _drop(doc, path)
    yield {**doc, "unexpected": 1}


def wire_ok(name, doc):
    """Tell whether the node takes this document.

    Sent as text (NaN and infinities as Python's json writes them, which the node's decoder refuses
    as not JSON)?
    """
    try:
        wire.decode(name, json.dumps(doc))
        return True
    except wire.WireError:
        return False


@pytest.mark.parametrize("name", list(wire.SPECS))
def test_schema_files_declare_draft_2020_12_and_are_valid_schemas(name):
    schema = load_schema(name)
    assert schema["$schema"] == DRAFT_2020_12
    assert jsonschema.validators.validator_for(schema) is jsonschema.Draft202012Validator
    jsonschema.Draft202012Validator.check_schema(schema)   # raises SchemaError if not


@pytest.mark.parametrize("name", list(wire.SPECS))
def test_schema_files_are_generated_from_the_specs(name):
    assert load_schema(name) == json.loads(json.dumps(wire.json_schema(name)))


@pytest.mark.parametrize("name", list(wire.SPECS))
def test_schema_and_code_accept_and_reject_the_same_documents(name):
    schema = load_schema(name)
    base = valid_documents()[name]
    assert schema_ok(schema, base) and wire_ok(name, base)
    seen = {True: 0, False: 0}
    for m in mutants(base):
        verdict = wire_ok(name, m)
        assert schema_ok(schema, m) == verdict, (name, json.dumps(m, default=str)[:300])
        seen[verdict] += 1
    # the corpus really exercises both sides
    assert seen[True] > 5 and seen[False] > 50


def test_errors_name_the_field_and_range():
    doc = valid_documents()["people"]
    doc["people"][0]["busyness"] = 1.7
    with pytest.raises(wire.WireError,
                       match=r"people\[0\]\.busyness: 1.7 is outside the allowed range \[0, 1\]"):
        wire.validate("people", doc)
    with pytest.raises(wire.WireError, match="result: 'maybe' is not one of helped"):
        wire.decode("outcome", '{"doc":"outcome","version":1,"request_id":"r","person_id":"p",'
                    '"result":"maybe"}')
    with pytest.raises(wire.WireError, match="NaN is not allowed"):
        wire.decode("people", '{"doc":"people","version":1,"stamp_s":NaN,"people":[]}')
    with pytest.raises(wire.WireError, match="kind: required when state is open"):
        wire.decode("task_status",
                    '{"doc":"task_status","version":1,"request_id":"r","state":"open"}')
    with pytest.raises(wire.WireError, match="not valid JSON"):
        wire.decode("outcome", "{nope")


def test_size_caps():
    with pytest.raises(wire.WireError, match="1000000 bytes"):
        wire.decode("people", '{"a":"' + "x" * wire.MAX_DOCUMENT_BYTES + '"}')
    many = [{"id": f"p{i}", "distance_m": 1.0} for i in range(wire.MAX_PEOPLE + 1)]
    with pytest.raises(wire.WireError,
                       match=r"people: 501 items is outside the allowed \[0, 500\]"):
        wire.people_document(many, 1.0)
    assert len(wire.decode("people", wire.people_document(many[:-1], 1.0))["people"]) == 500


candidate_st = st.builds(
    lambda i, d, age, a, b, x, act, asks, n, first, opt: Candidate(
        f"p{i}", d, 1000.0 - age, Belief(a, b), x, act, tuple(asks), n, first, opt),
    st.integers(0, 10**6), st.floats(0, 12), st.floats(0, 5), st.floats(0.05, 30),
    st.floats(0.05, 30), st.one_of(st.none(), st.floats(0, 1)),
    st.sampled_from(["", "charting", "with_patient", "on_call"]),
    st.lists(st.floats(-90000, 1000), max_size=5), st.integers(0, 50),
    st.one_of(st.none(), st.floats(-1e5, 1000)), st.booleans())


@given(cands=st.lists(candidate_st, max_size=6, unique_by=lambda c: c.person_id),
       robot_asks=st.lists(st.floats(-5000, 1000), max_size=15),
       urgency=st.floats(0, 1), cost=st.one_of(st.none(), st.floats(0, 2000)),
       kind=st.sampled_from(["door", "elevator", "other"]),
       interruption=st.floats(0, 20), hourly=st.integers(0, 14))
def test_replay_inputs_reproduce_the_decision_exactly(cands, robot_asks, urgency, cost, kind,
                                                      interruption, hourly):
    model = SiteModel()
    config = DecisionConfig(interruption_weight_s=interruption, max_asks_per_hour=hourly)
    need = HelpNeed("r", kind, 990.0, urgency=urgency, continue_cost_s=cost)
    original = decide(need, cands, 1000.0, robot_asks, model, config)
    text = wire.decision_text(original, robot_asks, model, config, "rb")
    doc = wire.decode("decision", text)
    rmodel, rconfig = wire.recorded_params(doc)
    assert (rmodel, rconfig) == (model, config)
    again = decide(*wire.replay_inputs(doc), rmodel, rconfig)
    assert (again.action, again.person_id) == (original.action, original.person_id)
    assert again.rationale() == doc["rationale"]
    assert doc["params_hash"] == original.evaluation.params_hash


def test_builders_round_trip_into_core_values():
    doc = wire.decode("task_status",
                      wire.task_status_document("r9", "open", "door", 0.5, help_time_s=15.0))
    need = wire.help_need_from(doc, 42.0)
    assert (need.kind, need.urgency, need.help_time_s, need.opened_at_s) == ("door", 0.5, 15.0,
                                                                             42.0)
    seen = wire.people_from(wire.decode("people", wire.people_document(
        [{"id": "n1", "distance_m": 3.0, "position": [1.0, 2.0, 3.0]}], 5.0)))
    assert seen[0].person_id == "n1" and seen[0].busyness is None
    assert seen[0].position == (1.0, 2.0, 3.0)


def test_a_decision_at_the_largest_caps_is_a_valid_document():
    """Found by the load work.

    The caps used to allow 100 000 asks while a decision document holds 1 000 ask times, so a robot
    allowed that many would publish decisions that review and replay refuse. The caps now stop at
    MAX_ASKS_CAP = wire.MAX_TIMES, and a decision at that cap, with a person asked that often too,
    still decodes.
    """
    from helpaware_node.core import candidate_from_record, note_ask, PersonRecord
    from helpaware_node.core.model import CoreInputError, MAX_ASKS_CAP
    assert wire.MAX_TIMES == MAX_ASKS_CAP
    model = SiteModel()
    config = DecisionConfig(max_asks_per_hour=MAX_ASKS_CAP,
                            max_asks_per_person_per_day=MAX_ASKS_CAP, min_reask_interval_s=0.0)
    with pytest.raises(CoreInputError, match=r"max_asks_per_hour.*\[0, 1000\]"):
        DecisionConfig(max_asks_per_hour=MAX_ASKS_CAP + 1)
    now = 10_000.0
    rec = PersonRecord.new(model)
    for k in range(3 * MAX_ASKS_CAP):          # more asks than any cap lets through
        rec = note_ask(rec, now - 3000.0 + k * 0.5, model)
    assert len(rec.ask_times_s) == MAX_ASKS_CAP
    robot = [now - 3000.0 + k * 3.0 for k in range(MAX_ASKS_CAP)]
    cand = candidate_from_record("p1", rec, now, model, 1.0, now, busyness=0.0)
    decision = decide(HelpNeed("r1", "door", now), [cand], now, robot, model, config)
    text = wire.decision_text(decision, robot, model, config, robot_id="r")
    doc = wire.decode("decision", text)
    assert len(doc["robot_ask_times_s"]) == MAX_ASKS_CAP
    assert len(doc["candidates"][0]["ask_times_s"]) == MAX_ASKS_CAP
