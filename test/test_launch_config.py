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

"""The node as its own process, started exactly from launch_config, driven by a second process."""
import json
import os
import signal
import subprocess
import sys

from helpaware_node import wire
from helpaware_node.core import decide
from helpaware_node.ros import launch_config
import pytest

HERE = os.path.dirname(__file__)


def _stop(proc, sig):
    proc.send_signal(sig)
    try:
        out, err = proc.communicate(timeout=30)
    except subprocess.TimeoutExpired:
        proc.kill()
        out, err = proc.communicate()
    return proc.returncode, err


def test_node_process_from_launch_config_decides_for_a_driver_process(tmp_path):
    remaps = tuple(launch_config.REMAPS) + (("people", "perception/people"),)
    node = launch_config.start(stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                               params=launch_config.SITE_PARAMS_FILE, namespace="/ward3",
                               remaps=[r for r in remaps if r != ("people", "people")])
    try:
        drv = subprocess.run([sys.executable, os.path.join(HERE, "cross_process_driver.py"),
                              "perception/people", "/ward3"], capture_output=True, text=True,
                             timeout=240)
        lines = [json.loads(x) for x in drv.stdout.splitlines() if x.startswith("{")]
        assert lines and lines[-1].get("done"), drv.stderr[-3000:]
        decisions = [x for x in lines if "action" in x]
        assert len(decisions) == 3, drv.stderr[-2000:]
        first = decisions[0]
        assert first["action"] == "ask" and first["person_id"] == "nurse-a"
        # the node ran with the site file: its parameters are recorded in every decision
        model, config = wire.recorded_params(first)
        assert config.continue_costs_s["door"] == 150.0
        assert "on_call" in config.protected_activities
        for d in decisions:   # each is reproduced by the core from its own record
            again = decide(*wire.replay_inputs(d), model, config)
            assert (again.action, again.person_id) == (d["action"], d["person_id"])
        # nurse-a declined at x0: the re-ask interval keeps them out of the next need
        row = next(r for r in decisions[1]["rationale"] if r["person_id"] == "nurse-a")
        assert row["excluded"] == "reask_interval"
    finally:
        code, err = _stop(node, signal.SIGTERM)
    assert code == 0, err[-2000:]
    assert "Traceback" not in err


def test_ctrl_c_exits_cleanly_without_traceback():
    node = launch_config.start(stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    import time
    deadline = time.monotonic() + 60
    line = ""
    while time.monotonic() < deadline and "configured" not in line:
        line = node.stderr.readline()
        if not line and node.poll() is not None:
            break
    assert "configured" in line
    code, err = _stop(node, signal.SIGINT)
    assert code == 0 and "Traceback" not in err, err[-2000:]


def test_launch_files_take_their_nodes_from_launch_config():
    for name in ("helpaware.launch.py", "example_loop.launch.py"):
        text = open(os.path.join(HERE, "..", "launch", name)).read()
        assert "from helpaware_node.ros import launch_config as lc" in text
        assert ".launch_kwargs()" in text and "_from_arguments(values)" in text, name
    import helpaware_node.ros.launch_config as mod
    assert "import launch" not in open(mod.__file__).read()


def test_launch_arguments_become_the_node_command_line():
    spec = launch_config.decider_from_arguments({
        "params_file": "hospital_night.yaml", "namespace": "ward3",
        "people_topic": "perception/people", "use_sim_time": "true", "respawn": "true",
        "respawn_delay_s": "1.5"})
    cmd = spec.command()
    pairs = list(zip(cmd, cmd[1:]))
    assert ("-r", "__ns:=/ward3") in pairs and ("-r", "people:=perception/people") in pairs
    assert ("-r", "__node:=helpaware_decider") in pairs and ("-p", "use_sim_time:=true") in pairs
    assert ("--params-file",
            os.path.join(launch_config.config_dir(), "hospital_night.yaml")) in pairs
    assert not any(a.startswith("task_status:=") for a in cmd)    # identity remaps left out
    kw = spec.launch_kwargs()
    assert kw["namespace"] == "/ward3" and kw["remappings"] == [("people", "perception/people")]
    assert kw["parameters"] == [spec.params_file, {"use_sim_time": True}]
    assert (kw["respawn"], kw["respawn_delay"]) == (True, 1.5)
    assert set(kw) <= launch_config.LAUNCH_ROS_NODE_KWARGS
    defaults = launch_config.decider_from_arguments({}).launch_kwargs()
    assert "respawn" not in defaults and defaults["namespace"] is None
    assert defaults["parameters"] == [os.path.join(launch_config.config_dir(), "default.yaml")]


@pytest.mark.parametrize("values, message", [
    ({"respawn": "yes"}, "respawn: 'yes' is not one of true, false"),
    ({"use_sim_time": "1"}, "use_sim_time: '1' is not one of true, false"),
    ({"respawn_delay_s": "-2"}, r"respawn_delay_s: '-2' is not a number in \[0, 3600\]"),
    ({"respawn_delay_s": "soon"}, "respawn_delay_s: 'soon' is not a number"),
    ({"people_topic": " "}, "people_topic: empty"),
])
def test_bad_launch_arguments_are_named(values, message):
    with pytest.raises(launch_config.LaunchArgumentError, match=message):
        launch_config.decider_from_arguments(values)


def test_loop_arguments_are_checked_and_shared():
    specs = launch_config.loop_from_arguments({"namespace": "r1", "answer": "declined",
                                               "stuck_period_s": "3"})
    assert [s.executable for s in specs] == ["helpaware_decider", "example_perception",
                                             "example_behaviour_layer", "example_ask_delivery"]
    assert {s.fully_qualified_namespace for s in specs} == {"/r1"}
    assert specs[3].overrides == {"answer": "declined"}
    assert specs[2].overrides == {"stuck_period_s": 3.0}
    with pytest.raises(launch_config.LaunchArgumentError, match="answer: 'maybe' is not one of"):
        launch_config.loop_from_arguments({"answer": "maybe"})


def test_executable_is_the_one_under_the_ament_prefix_when_one_is_sourced(tmp_path, monkeypatch):
    """A sourced workspace wins over the venv.

    Lib/helpaware_node/<exe> under its prefix.
    """
    index = tmp_path / "share" / "ament_index" / "resource_index" / "packages"
    index.mkdir(parents=True)
    (index / "helpaware_node").write_text("")
    lib = tmp_path / "lib" / "helpaware_node"
    lib.mkdir(parents=True)
    exe = lib / "helpaware_decider"
    exe.write_text("#!/bin/sh\n")
    exe.chmod(0o755)
    monkeypatch.setenv("AMENT_PREFIX_PATH", str(tmp_path))
    assert launch_config.executable() == [str(exe)]
    monkeypatch.delenv("AMENT_PREFIX_PATH")
    venv_exe = os.path.join(sys.prefix, "lib", "helpaware_node", "helpaware_decider")
    if os.access(venv_exe, os.X_OK):   # make venv puts it there (setup.cfg install_scripts)
        assert launch_config.executable() == [venv_exe]
    else:
        assert launch_config.executable()[-2:] == ["-m", "helpaware_node.ros.node"]


@pytest.mark.parametrize("value", ["off", "on", "yes", "No", "true", "null", "~", "1.5", "12",
                                   "", "a: b", "[1]", "it's", "apply", "memory", "/tmp/x.db"])
def test_string_overrides_reach_the_node_as_strings(value):
    # rcl reads each `-p name:=value` as YAML 1.1 (as PyYAML's safe_load does: off, yes and
    # null are not strings there), so the text on the command line must read back as the
    # string given; PyYAML is the outside reference
    import yaml
    args = launch_config.decider(None, "", (), {"site_learning": value}).ros_arguments()
    text = args[args.index("-p") + 1].split(":=", 1)[1]
    assert yaml.safe_load(text) == value and isinstance(yaml.safe_load(text), str)
