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

"""Hypothesis fuzz of parameter-file values through ros/params.py `build` (no rclpy needed).

rcl already refuses a value of the wrong type (test_bad_files.py, test_params.py), so each
generated file keeps the declared types but takes any value of that type (NaN, infinities,
huge, negative, empty strings). Through a YAML round trip, `build` must either give a valid
config or raise CoreInputError naming a parameter it was given; nothing else, never a crash.
"""
import math

from helpaware_node.core.model import CoreInputError
from helpaware_node.ros import params
from hypothesis import given, strategies as st
import yaml

SPECS = {s.name: s for s in params.all_specs() if s.name != params.KINDS_PARAM}
NAMES = sorted(SPECS)
PAIR_NAMES = {"typical_busyness", "busyness_limit"}

FLOATS = st.one_of(st.floats(allow_nan=True, allow_infinity=True),
                   st.floats(min_value=-10.0, max_value=10.0),
                   st.sampled_from([0.0, -0.0, 1e-300, 1e308]))
INTS = st.one_of(st.integers(min_value=-2**63, max_value=2**63 - 1),
                 st.integers(min_value=-5, max_value=50))
STRINGS = st.text(max_size=20)
VALUE_FOR = {"double": FLOATS, "integer": INTS, "bool": st.booleans(), "string": STRINGS,
             "string array": st.lists(STRINGS, max_size=4)}


@st.composite
def changed_values(draw):
    names = draw(st.lists(st.sampled_from(NAMES), min_size=1, max_size=4, unique=True))
    return {n: draw(VALUE_FOR[SPECS[n].type_name]) for n in names}


@given(changed_values())
def test_every_value_file_gives_a_config_or_a_named_refusal(changes):
    text = yaml.safe_dump({"helpaware_decider": {"ros__parameters": changes}})
    loaded = yaml.safe_load(text)["helpaware_decider"]["ros__parameters"]
    values = {**params.defaults(), **loaded}
    try:
        model, config, settings = params.build(values)
    except CoreInputError as exc:
        message = str(exc)
        named = set(changes) | (PAIR_NAMES if PAIR_NAMES & set(changes) else set())
        # a cost kind is named by its kind; protected labels by the field
        assert any(n in message or n.split(".")[-1] in message for n in named), (changes,
                                                                                 message)
        return
    for n, v in changes.items():        # accepted: every number in force is finite
        if isinstance(v, float) and SPECS[n].group in ("model", "config", "cost"):
            assert math.isfinite(v), (n, v)
    assert config.typical_busyness < config.busyness_limit
