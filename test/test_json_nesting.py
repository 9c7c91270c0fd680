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

"""Deep nesting in JSON text is refused naming the field that holds it (issue 14 item 1).

Python's json module recurses: a number nested about 1 000 lists deep parses from a shallow
stack and raises RecursionError from a deeper one, without saying where. wire.parse_json
(which the fleet and privacy decoders use too) then reads the text again without recursion
(wire.deep_nesting_at) and names the path. The expected paths here are built with the
documents, not read from the code.
"""
import json

from helpaware_node import wire
from helpaware_node.core.model import CoreInputError
from helpaware_node.fleet_documents import decode_document
from helpaware_node.store import SiteKeys
from hypothesis import given, strategies as st
import pytest


def nested(depth: int, as_object: bool = False) -> str:
    if as_object:
        return '{"a":' * depth + "1" + "}" * depth
    return "[" * depth + "1" + "]" * depth


def at_stack_depth(extra: int, fn, *args):
    if extra <= 0:
        return fn(*args)
    return at_stack_depth(extra - 1, fn, *args)


@pytest.mark.parametrize("depth", [64, 980, 5000, 100_000])
@pytest.mark.parametrize("extra", [0, 400, 800])
def test_a_deep_number_in_stamp_s_is_refused_naming_stamp_s(depth, extra):
    text = '{"doc":"people","version":1,"stamp_s":' + nested(depth) + ',"people":[]}'
    with pytest.raises(wire.WireError) as err:
        at_stack_depth(extra, wire.decode, "people", text)
    assert str(err.value).startswith("stamp_s"), str(err.value)
    assert len(str(err.value)) < 200


@given(st.lists(st.sampled_from(["people", 0, "position", 1, "x", "y"]), min_size=1,
                max_size=4), st.integers(64, 3000), st.booleans(),
       st.text(alphabet='[]{}",:\\ab', max_size=12))
def test_the_path_is_found_whatever_the_strings_around_it_hold(prefix, depth, obj, noise):
    """Strings (names and values) may hold brackets, quotes and escapes: they never count."""
    doc = nested(depth, obj)
    path = ""
    for p in reversed(prefix):
        if isinstance(p, int):
            doc = "[" + ",".join(['"' + noise.replace("\\", "\\\\").replace('"', '\\"') + '"']
                                 * p + [doc]) + "]"
        else:
            doc = "{" + json.dumps(noise) + ":0," + json.dumps(p) + ":" + doc + "}"
    for p in prefix:
        path += f"[{p}]" if isinstance(p, int) else (f".{p}" if path else p)
    found, levels = wire.deep_nesting_at(doc, 64)
    assert levels == 64
    assert found.startswith(path[:60]), (found, path)


def test_shallow_text_is_not_reported():
    assert wire.deep_nesting_at('{"a":[[["[[[[[[[["]]],"b":{"c":"}}}}"}}', 5) is None


def test_the_fleet_decoder_names_the_field_too():
    keys = SiteKeys.single(bytes(range(32))).key_ring()
    doc = keys.sign({"v": 2, "kind": "outcome", "event_id": "p/1", "person_key": "ab" * 32,
                     "time_s": 1.0, "result": "helped", "busyness": 0.1, "ask_load": 0.0})
    text = json.dumps({**doc, "busyness": "H"}).replace('"H"', nested(40_000))
    with pytest.raises(CoreInputError, match=r"^fleet message: busyness\[0\]"):
        decode_document(text, keys)
