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

"""Parameters: docs list exactly what is declared; bad values refused at start-up and live."""
import os
import re
import subprocess
import sys

from helpaware_node.core import DecisionConfig, SiteModel
from helpaware_node.ros import params
from helpaware_node.ros.node import HelpAwareNode, StartupError
import pytest
from rclpy.parameter import Parameter
import yaml

ROS_OWN = {"use_sim_time", "start_type_description_service"}  # declared by rclpy itself
ROOT = os.path.join(os.path.dirname(__file__), "..")


@pytest.fixture
def node(ctx):
    n = HelpAwareNode(context=ctx)
    yield n
    n.destroy_node()


def _doc_rows():
    text = open(os.path.join(ROOT, "docs", "parameters.md")).read()
    rows = {}
    for line in text.splitlines():
        m = re.match(r"\| `([^`]+)` \| ([^|]+) \| `([^`]*)` \| ([^|]+) \|", line)
        if m:
            rows[m.group(1)] = (m.group(2).strip(), m.group(3), m.group(4).strip())
    return rows


def test_docs_list_exactly_the_declared_parameters_with_defaults_and_ranges(node):
    declared = {name: p for name, p in node._parameters.items() if name not in ROS_OWN}
    rows = _doc_rows()
    assert set(rows) == set(declared)
    for name, p in declared.items():
        type_name, default, rng = rows[name]
        desc = node.describe_parameter(name)
        value = p.value
        if isinstance(value, bool):
            assert default == ("true" if value else "false")
        elif isinstance(value, float):
            assert float(default) == value
        elif isinstance(value, int):
            assert int(default) == value
        elif isinstance(value, str):
            assert default == f'"{value}"'
        else:
            assert default == "[" + ", ".join(value) + "]"
        ranges = list(desc.floating_point_range) + list(desc.integer_range)
        if ranges:
            lo, hi = (float(v) for v in rng.strip("[]").split(","))
            assert (lo, hi) == pytest.approx((ranges[0].from_value, ranges[0].to_value))
        else:
            assert rng == "-"


def test_declared_defaults_are_the_core_defaults(node):
    assert node.params.model == SiteModel()
    assert node.params.config == DecisionConfig()


@pytest.mark.parametrize("name", ["default.yaml", "hospital_night.yaml"])
def test_shipped_files_are_keyed_by_node_name_and_typed(name):
    data = yaml.safe_load(open(os.path.join(ROOT, "config", name)))
    values = data["/**/helpaware_decider"]["ros__parameters"]
    specs = {s.name: s for s in params.all_specs()}
    assert set(values) == set(specs)
    for k, v in values.items():
        expected = {"double": float, "integer": int, "bool": bool, "string": str,
                    "string array": list}[specs[k].type_name]
        assert type(v) is expected, (k, v)   # a YAML 1 where 1.0 is meant would fail here
    built = params.build({**params.defaults(), **values})
    assert built[1].continue_costs_s["door"] == values["continue_cost_s.door"]


def _start_with(tmp_path, values):
    path = tmp_path / "p.yaml"
    path.write_text(yaml.safe_dump({"helpaware_decider": {"ros__parameters": values}}))
    return subprocess.run([sys.executable, "-m", "helpaware_node.ros.node", "--ros-args",
                           "--params-file", str(path)], capture_output=True, text=True,
                          timeout=60, env=os.environ.copy())


@pytest.mark.parametrize("values, reason", [
    ({"k_busy": 99.0}, "k_busy"),
    ({"k_busy": 1}, "k_busy"),
    ({"typical_busyness": 0.9, "busyness_limit": 0.85}, "typical_busyness"),
    ({"pending_ask_timeout_s": 0.0}, "pending_ask_timeout_s"),
])
def test_bad_parameter_file_stops_start_up_with_the_reason(tmp_path, values, reason):
    proc = _start_with(tmp_path, values)
    assert proc.returncode == 2, proc.stderr[-2000:]
    assert "parameters refused" in proc.stderr and reason in proc.stderr
    assert "Traceback" not in proc.stderr


def test_start_up_refusal_in_process(ctx):
    with pytest.raises(StartupError, match="busyness_limit"):
        HelpAwareNode(context=ctx, parameter_overrides=[
            Parameter("typical_busyness", value=0.5), Parameter("busyness_limit", value=0.4)])


@pytest.mark.parametrize("param, reason", [
    (Parameter("k_busy", value=99.0), "k_busy"),
    (Parameter("k_busy", value="high"), "k_busy"),
    (Parameter("max_asks_per_hour", value=-1), "max_asks_per_hour"),
    (Parameter("typical_busyness", value=0.9), "busyness_limit"),
    (Parameter("store_path", value="/tmp/x"), "store_path"),
    (Parameter("protected_activities", value=[""]), "protected_activities"),
])
def test_live_set_refused_with_reason_and_old_values_kept(node, param, reason):
    before = (node.params.model, node.params.config, node.params.settings)
    [result] = node.set_parameters([param])
    assert not result.successful
    assert any(r in result.reason for r in (reason, "read-only", "parameter type"))
    assert (node.params.model, node.params.config, node.params.settings) == before
    assert node.get_parameter(param.name).value == params.defaults()[param.name] or \
        param.name == "store_path"


def test_live_set_takes_effect_and_pairs_checked_together(node):
    result = node.set_parameters_atomically([Parameter("busyness_limit", value=0.95),
                                             Parameter("typical_busyness", value=0.9)])
    assert result.successful
    assert node.params.config.typical_busyness == 0.9
    [r] = node.set_parameters([Parameter("continue_cost_s.door", value=33.0)])
    assert r.successful and node.params.config.continue_costs_s["door"] == 33.0
