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

"""The launch files, read without running them.

Only launch and launch_ros names that exist in the ROS 2 releases we support, and exactly the
arguments docs/integration.md lists.

Supported releases: Humble, Jazzy and Kilted. The names below are checked against the vendored
sources (../shared/vendor/ros-launch: launch 3.7.1 and launch_ros 0.28.0 from rolling, December
2024, the line Kilted was branched from) wherever launch can be imported; for Humble and Jazzy
they are from memory of those releases (each of these names has been in launch since before
Humble: Node's package/executable/name/namespace/parameters/remappings since Foxy, and
ExecuteProcess's respawn and respawn_delay since Foxy). The launch files run for real in
test/installed/test_launch_files.py.
"""
import ast
import importlib.util
import inspect
import os
import re

from helpaware_node.ros import launch_config as lc
import pytest

ROOT = os.path.join(os.path.dirname(__file__), "..")
LAUNCH_DIR = os.path.join(ROOT, "launch")
FILES = {"helpaware.launch.py": lc.DECIDER_ARGUMENTS,
         "example_loop.launch.py": lc.LOOP_ARGUMENTS}

# module -> names the launch files may import (all present in Humble, Jazzy and Kilted)
SUPPORTED_NAMES = {
    "launch": {"LaunchDescription"},
    "launch.actions": {"DeclareLaunchArgument", "OpaqueFunction"},
    "launch.substitutions": {"LaunchConfiguration"},
    "launch_ros.actions": {"Node"},
}
# keywords of the calls they make; Node's come from launch_config.LAUNCH_ROS_NODE_KWARGS
CALL_KEYWORDS = {"DeclareLaunchArgument": {"default_value", "description"},
                 "OpaqueFunction": {"function"}, "Node": lc.LAUNCH_ROS_NODE_KWARGS}


def parsed(name):
    with open(os.path.join(LAUNCH_DIR, name)) as fh:
        return ast.parse(fh.read(), name)


def imported_names(tree):
    out = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            out.setdefault(node.module, set()).update(a.name for a in node.names)
        elif isinstance(node, ast.Import):
            for a in node.names:
                out.setdefault(a.name, set())
    return out


def test_the_two_launch_files_are_the_ones_checked():
    assert sorted(os.listdir(LAUNCH_DIR)) == sorted(FILES)


@pytest.mark.parametrize("name", sorted(FILES))
def test_only_supported_launch_names_are_used(name):
    tree = parsed(name)
    for module, names in imported_names(tree).items():
        if module.startswith("helpaware_node"):
            continue
        assert module in SUPPORTED_NAMES, f"{name} imports {module}"
        assert names <= SUPPORTED_NAMES[module], (name, module, names - SUPPORTED_NAMES[module])
    calls = [n for n in ast.walk(tree) if isinstance(n, ast.Call) and isinstance(n.func, ast.Name)]
    for call in calls:
        allowed = CALL_KEYWORDS.get(call.func.id)
        if allowed is not None:
            used = {k.arg for k in call.keywords if k.arg is not None}
            assert used <= allowed, (name, call.func.id, used - allowed)
    assert {c.func.id for c in calls} >= {"DeclareLaunchArgument", "OpaqueFunction", "Node"}


def test_node_keywords_from_launch_config_are_supported():
    for spec in [lc.decider_from_arguments({"respawn": "true"})] + lc.loop_from_arguments({}):
        assert set(spec.launch_kwargs()) | {"output"} <= lc.LAUNCH_ROS_NODE_KWARGS


def test_names_exist_in_the_launch_that_is_installed():
    if importlib.util.find_spec("launch_ros") is None:
        pytest.skip("launch_ros is not installed here (make test installs it from "
                    "../shared/vendor/ros-launch where that exists; a ROS 2 install has it)")
    import launch.actions
    import launch_ros.actions
    for module, names in SUPPORTED_NAMES.items():
        mod = importlib.import_module(module)
        for n in names:
            assert hasattr(mod, n), f"{module}.{n}"

    def params(cls):
        return {p for k in cls.__mro__ if "__init__" in vars(k)
                for p in inspect.signature(k.__init__).parameters}
    node_kwargs = params(launch_ros.actions.Node)
    assert lc.LAUNCH_ROS_NODE_KWARGS <= node_kwargs, lc.LAUNCH_ROS_NODE_KWARGS - node_kwargs
    assert CALL_KEYWORDS["DeclareLaunchArgument"] <= params(launch.actions.DeclareLaunchArgument)
    assert CALL_KEYWORDS["OpaqueFunction"] <= params(launch.actions.OpaqueFunction)


def documented_arguments(launch_file):
    """Return the argument table after the paragraph naming `launch_file` in integration.md."""
    with open(os.path.join(ROOT, "docs", "integration.md")) as fh:
        lines = fh.read().splitlines()
    start = next(i for i, x in enumerate(lines) if x.startswith(f"`{launch_file}`"))
    rows, in_table = [], False
    for line in lines[start + 1:]:
        if line.startswith("|"):
            in_table = True
            cells = [c.strip() for c in line.strip("|").split("|")]
            if cells[0] not in ("argument",) and not set(cells[0]) <= {"-"}:
                rows.append(cells)
        elif in_table:
            break
    return [(re.sub(r"`", "", r[0]), "" if r[1] == "(empty)" else r[1].strip("`"), r[2])
            for r in rows]


@pytest.mark.parametrize("name", sorted(FILES))
def test_declared_arguments_match_the_docs(name):
    docs = documented_arguments(name)
    assert docs == [(a.name, a.default, a.description) for a in FILES[name]]
    if importlib.util.find_spec("launch_ros") is None:
        return      # the launch file declares lc's arguments: checked by the AST test above
    spec = importlib.util.spec_from_file_location(name.replace(".", "_"),
                                                  os.path.join(LAUNCH_DIR, name))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    declared = module.generate_launch_description().get_launch_arguments()
    assert [(a.name, "".join(s.text for s in a.default_value)) for a in declared] == \
        [(n, d) for n, d, _ in docs]
