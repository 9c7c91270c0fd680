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

"""Any input, however hostile, gets a bounded error message naming its field (issue 14 item 1).

A peer or a file can hold any JSON-like value: a number nested a thousand lists deep (repr
recursed and raised RecursionError), a megabyte string, an integer of 5 000 digits (str()
refuses it, float() overflows), NaN, inf, lone surrogates. Every validator of the core and
of wire.py must answer only with CoreInputError / WireError, under MESSAGE_LIMIT characters.
"""
import math

from document_paths import field_paths, replaced
from helpaware_node import wire
from helpaware_node.core import (
    Belief,
    Candidate,
    CoreInputError,
    DecisionConfig,
    HelpNeed,
    OutcomeEvent,
    params_hash,
    Result,
    SiteModel,
)
from helpaware_node.core.baselines import make_chooser
from helpaware_node.core.model import check_range, from_plain, to_plain
from helpaware_node.core.preview import describe, MAX_PREVIEW_CHARS, quoted, short_name
from hypothesis import given, strategies as st
import pytest
from test_wire import valid_documents

MESSAGE_LIMIT = 400   # characters; the longest seen is printed by test_longest_messages


def nested(leaf, depth: int, kind: str):
    """`leaf` inside `depth` lists or objects, built without recursion."""
    value = leaf
    for i in range(depth):
        if kind == "list" or (kind == "mixed" and i % 2):
            value = [value]
        else:
            value = {"k": value}
    return value


class Hostile:
    """A drawn value with a short label.

    Hypothesis prints the label, as repr() of the value itself may recurse or refuse (the very
    thing tested).
    """

    def __init__(self, value, label: str):
        self.value, self.label = value, label

    def __repr__(self) -> str:
        return f"<{self.label}>"


leaves = st.one_of(
    st.none(), st.booleans(), st.integers(), st.floats(),            # NaN and +-inf included
    st.sampled_from([math.nan, math.inf, -math.inf, 1e308, -0.0, 5e-324]),
    st.integers(20, 20_000).map(lambda e: 10 ** e),                  # past float, past str()
    st.integers(20, 5_000).map(lambda e: -(7 ** e)),
    st.text(max_size=30),
    st.text(st.characters(min_codepoint=0xD800, max_codepoint=0xDFFF), min_size=1,
            max_size=5),                                             # lone surrogates
    st.builds(lambda ch, n: ch * n, st.characters(), st.integers(1000, 2_000_000)),
    st.sampled_from(["\x00" * 500, "a\nb", "ok"]))
deep = st.builds(lambda leaf, depth, kind: Hostile(nested(leaf, depth, kind),
                                                   f"{describe(leaf)} in {depth} {kind}"),
                 leaves, st.integers(1, 5000), st.sampled_from(["list", "dict", "mixed"]))
shallow = st.recursive(leaves, lambda inner: st.lists(inner, max_size=4)
                       | st.dictionaries(st.text(max_size=8), inner, max_size=4), max_leaves=8)
json_like = st.one_of(leaves.map(lambda v: Hostile(v, describe(v))), deep,
                      shallow.map(lambda v: Hostile(v, "shallow " + describe(v))))


def refused_within_bounds(call, errors=(CoreInputError,)):
    """Run `call`; it may succeed or raise one of `errors` with a bounded message."""
    try:
        return call()
    except errors as exc:
        text = str(exc)
        assert len(text) <= MESSAGE_LIMIT, text[:200]
        text.encode("utf-8")        # printable and loggable: no lone surrogate in it
        return exc


SITE_FIELDS = list(to_plain(SiteModel()))
CONFIG_FIELDS = list(to_plain(DecisionConfig()))


@given(json_like)
def test_check_range_answers_any_value_with_a_bounded_message(value):
    value = value.value
    out = refused_within_bounds(lambda: check_range("field", value, -1e15, 1e15))
    if not isinstance(out, Exception):
        assert isinstance(out, float) and -1e15 <= out <= 1e15


@given(json_like, st.sampled_from(SITE_FIELDS))
def test_site_model_fields(value, name):
    value = value.value
    refused_within_bounds(lambda: SiteModel(**{name: value}))


@given(json_like, st.sampled_from(CONFIG_FIELDS))
def test_decision_config_fields(value, name):
    value = value.value
    config = refused_within_bounds(lambda: DecisionConfig(**{name: value}))
    if isinstance(config, DecisionConfig):     # accepted: it must then be usable everywhere
        assert len(params_hash(SiteModel(), config)) == 16


@given(json_like, st.sampled_from(["a", "b"]))
def test_belief(value, side):
    value = value.value
    refused_within_bounds(lambda: Belief(**{"a": 1.0, "b": 1.0, side: value}))


@given(json_like, st.sampled_from(["request_id", "kind", "opened_at_s", "urgency",
                                   "continue_cost_s", "help_time_s"]))
def test_help_need(value, name):
    value = value.value
    fields = {"request_id": "r", "kind": "door", "opened_at_s": 1.0, name: value}
    refused_within_bounds(lambda: HelpNeed(**fields))


@given(json_like, st.sampled_from(["person_id", "distance_m", "observed_at_s", "busyness"]),
       st.one_of(st.just("p"), st.text(min_size=1_000, max_size=2_000)))
def test_candidate(value, name, person_id):
    value = value.value
    fields = {"person_id": person_id, "distance_m": 1.0, "observed_at_s": 1.0,
              "belief": Belief(1.0, 1.0), name: value}
    refused_within_bounds(lambda: Candidate(**fields))


@given(json_like, st.sampled_from(["time_s", "busyness", "ask_load", "result"]))
def test_outcome_event_and_result(value, name):
    value = value.value
    fields = {"time_s": 1.0, "result": "helped", "busyness": 0.0, "ask_load": 0.0, name: value}
    refused_within_bounds(lambda: OutcomeEvent(**fields))
    refused_within_bounds(lambda: Result.parse(value))


@given(json_like, st.sampled_from(CONFIG_FIELDS), json_like)
def test_from_plain_with_any_field_and_any_key(value, name, key):
    value = value.value
    key = key.value
    refused_within_bounds(lambda: from_plain(DecisionConfig, {name: value}))
    if isinstance(key, str):
        refused_within_bounds(lambda: from_plain(SiteModel, {key: value}))
    refused_within_bounds(lambda: from_plain(SiteModel, value))


@given(json_like)
def test_policy_name(value):
    value = value.value
    refused_within_bounds(lambda: make_chooser(value, DecisionConfig()), errors=(ValueError,))


DOCS = valid_documents()
PATHS = [(name, path) for name, doc in DOCS.items()
         for path in field_paths(doc, items_per_list=1)]


@given(json_like, st.sampled_from(PATHS))
def test_wire_validate_any_field_of_any_document(value, where):
    value = value.value
    name, path = where
    doc = replaced(DOCS[name], path, value)
    refused_within_bounds(lambda: wire.validate(name, doc), errors=(wire.WireError,))
    if name == "decision":
        refused_within_bounds(lambda: wire.recorded_params(doc), errors=(wire.WireError,))
        refused_within_bounds(lambda: wire.replay_inputs(doc),
                              errors=(wire.WireError, CoreInputError))


@given(json_like, st.sampled_from(["model", "config"]),
       st.sampled_from(SITE_FIELDS + CONFIG_FIELDS))
def test_wire_recorded_parameters_with_any_value(value, part, field):
    value = value.value
    doc = dict(DOCS["decision"])
    params = {k: dict(v) for k, v in doc["parameters"].items()}
    params[part][field] = value
    doc["parameters"] = params
    refused_within_bounds(lambda: wire.recorded_params(doc), errors=(wire.WireError,))


@given(json_like)
def test_wire_validate_any_whole_document_and_name(value):
    value = value.value
    refused_within_bounds(lambda: wire.validate("people", value), errors=(wire.WireError,))
    refused_within_bounds(lambda: wire.validate(value if isinstance(value, str) else "x", {}),
                          errors=(wire.WireError,))


@pytest.mark.parametrize("depth", [980, 5000, 100_000])
def test_deeply_nested_text_is_refused_by_the_decoder(depth):
    text = ('{"doc":"outcome","version":1,"request_id":"r","person_id":"p","result":"helped",'
            f'"stamp_s":{"[" * depth}1{"]" * depth}}}')
    err = refused_within_bounds(lambda: wire.decode("outcome", text), errors=(wire.WireError,))
    assert isinstance(err, wire.WireError)


def test_the_reported_document_names_the_field_and_type():
    # issue 14 item 1: time_s or busyness nested ~980 lists deep raised RecursionError
    value = nested(5.0, 980, "list")
    with pytest.raises(CoreInputError, match=r"^time_s: expected a number, got list of 1 item$"):
        OutcomeEvent(value, "helped", 0.1, 0.0)
    with pytest.raises(CoreInputError, match=r"^busyness: expected a number, got list of 1 item$"):
        OutcomeEvent(1.0, "helped", value, 0.0)
    doc = dict(DOCS["outcome"], stamp_s=value)
    with pytest.raises(wire.WireError, match=r"^stamp_s: expected a number, got list of 1 item$"):
        wire.validate("outcome", doc)


def test_huge_values_are_summarised():
    with pytest.raises(CoreInputError) as exc:
        check_range("busyness", "x" * 1_000_000, 0.0, 1.0)
    assert str(exc.value) == ("busyness: expected a number, got string "
                              "'xxxxxxxxxxxxxxxxxxxxxxxx'... (1000000 characters)")
    with pytest.raises(CoreInputError, match=r"^k_busy: an integer of about 401 digits is "
                                             r"outside the allowed range \[0, 50\]$"):
        SiteModel(k_busy=10 ** 400)
    # 10**5000 is past Python's 4300-digit str() limit; its size comes from the bit length
    with pytest.raises(wire.WireError, match=r"an integer of about 5001 digits is outside"):
        wire.validate("outcome", dict(DOCS["outcome"], stamp_s=10 ** 5000))
    with pytest.raises(wire.WireError, match=r"^result: '\\ud800' is not one of helped"):
        wire.validate("outcome", dict(DOCS["outcome"], result="\ud800"))


def test_range_limits_print_as_they_are():
    # issue 14 item 9: the +-1e15 limits printed as [-inf, inf]
    with pytest.raises(wire.WireError, match=r"^stamp_s: 1e\+16 is outside the allowed range "
                                             r"\[-1e\+15, 1e\+15\]$"):
        wire.validate("outcome", dict(DOCS["outcome"], stamp_s=1e16))
    with pytest.raises(wire.WireError, match=r"\[-1e\+15, 1e\+15\]$"):
        wire.validate("outcome", dict(DOCS["outcome"], stamp_s=math.inf))
    with pytest.raises(CoreInputError, match=r"^opened_at_s: -2000000000000000.0 is outside "
                                             r"the allowed range \[-1e\+15, 1e\+15\]$"):
        HelpNeed("r", "door", -2e15)
    # only a true infinity prints as inf (and closes with a parenthesis)
    with pytest.raises(CoreInputError, match=r"^x: -1.0 is outside the allowed range \[0, inf\)$"):
        check_range("x", -1.0, 0.0)


@given(json_like)
def test_previews_are_bounded(value):
    value = value.value
    for text in (describe(value), quoted(value), short_name(value)):
        assert len(text) <= MAX_PREVIEW_CHARS
        text.encode("utf-8")


def test_longest_messages():
    """Print the longest messages the corpus below produces (the figure MESSAGE_LIMIT holds)."""
    corpus = [nested(1.0, 3000, "mixed"), "y" * 100_000, 10 ** 6000, math.nan, "\udfff" * 40]
    longest = ""
    for name, doc in DOCS.items():
        for path in field_paths(doc, items_per_list=1):
            for value in corpus:
                err = refused_within_bounds(lambda: wire.validate(name,
                                                                  replaced(doc, path, value)),
                                            errors=(wire.WireError,))
                if isinstance(err, Exception) and len(str(err)) > len(longest):
                    longest = str(err)
    print(f"longest wire message: {len(longest)} characters: {longest}")
    assert 0 < len(longest) <= MESSAGE_LIMIT


def test_context_factor_names_the_first_bad_value_not_the_array():
    from helpaware_node.core import context_factor
    import numpy as np
    busyness = np.full(5000, 0.2)
    busyness[1234] = 7.5
    with pytest.raises(CoreInputError,
                       match=r"^busyness: 7.5 \(one of 5000 values\) must lie in \[0, 1\]$"):
        context_factor(busyness, np.zeros(5000), 2.0, 0.7)
    with pytest.raises(CoreInputError, match=r"^ask load: nan must be finite and >= 0$"):
        context_factor(0.2, math.nan, 2.0, 0.7)
