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

"""The parameter file written by `helpaware fit` loads into the node's own declarations.

Checked against the node's parameter table (helpaware_node/ros/params.py) and, through rclpy,
by declaring every parameter on a node started with `--params-file` on the written file.
"""

from helpaware_node.fit.paramfile import DEFAULT_NODE_NAME, FITTED_NAMES, render_param_file
import pytest

params = pytest.importorskip("helpaware_node.ros.params")

FITTED = {"prior_a": 3.4, "prior_b": 5.0, "k_busy": 1.0, "k_load": 0.0, "notice_probability": 1.0}


def write(tmp_path):
    path = tmp_path / "tuned.yaml"
    path.write_text(render_param_file(FITTED, ["test file"]))
    return str(path)


def test_names_types_and_ranges_match_the_node_table(tmp_path):
    specs = {s.name: s for s in params.MODEL_PARAMS}
    for name in FITTED_NAMES:
        assert specs[name].type_name == "double"
    model, _config, _settings = params.build({**params.defaults(), **FITTED})
    assert model.prior_a == 3.4 and model.notice_probability == 1.0


def test_node_name_matches_the_node():
    node_mod = pytest.importorskip("helpaware_node.ros.node")
    assert node_mod.NODE_NAME == DEFAULT_NODE_NAME


def test_written_file_loads_into_node_declarations(tmp_path):
    rclpy = pytest.importorskip("rclpy")
    path = write(tmp_path)
    ctx = rclpy.context.Context()
    rclpy.init(args=["--ros-args", "--params-file", path], context=ctx)
    try:
        node = rclpy.create_node(DEFAULT_NODE_NAME, context=ctx)
        try:
            declared = params.NodeParameters(node)
            assert declared.rejected == 0, declared.last_rejection
            for name, value in FITTED.items():
                assert node.get_parameter(name).value == value
                assert getattr(declared.model, name) == value
            # a parameter the file does not give keeps the node's default
            default = params.MODEL_DEFAULTS.ask_memory_half_life_s
            assert declared.model.ask_memory_half_life_s == default
        finally:
            node.destroy_node()
    finally:
        rclpy.shutdown(context=ctx)
