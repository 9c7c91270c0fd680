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

"""colcon builds the package as a ROS 2 user would; the install runs on its own.

Both variants (plain and --symlink-install) build without a single warning; the install holds
the data and executables; the installed code finds its executable, parameter files and
scenarios in the install (not the venv, not the source tree); the installed node answers a help
need; `helpaware simulate` runs from the install with no source tree around.
"""
import json
import os
import re
import signal
import subprocess
import sys

from installs import PACKAGE, ROOT
import pytest
import yaml

HERE = os.path.dirname(__file__)
DRIVER = os.path.join(HERE, "..", "cross_process_driver.py")
VARIANTS = ["plain", "symlink"]


def installed(colcon_builds, variant):
    build = colcon_builds[variant]
    assert build.install is not None, (build.returncode, build.stderr[-3000:])
    return build.install


@pytest.mark.parametrize("variant", VARIANTS)
def test_builds_without_a_warning(colcon_builds, variant):
    build = colcon_builds[variant]
    assert build.returncode == 0, build.stdout[-3000:] + build.stderr[-3000:]
    # colcon passes each package's stderr through (console_direct): any line there is a warning
    assert build.stderr.strip() == "", build.stderr[-3000:]
    warnings = [x for x in build.stdout.splitlines() if re.search(r"warn", x, re.IGNORECASE)]
    assert warnings == [], warnings[:10]
    assert f"Finished <<< {PACKAGE}" in build.stdout


def source_files(directory):
    """Every file below `directory`, as paths relative to it (hidden ones left out)."""
    return sorted(os.path.relpath(os.path.join(d, n), directory)
                  for d, _, names in os.walk(directory) for n in names if not n.startswith("."))


def test_install_holds_data_and_executables(colcon_builds):
    inst = installed(colcon_builds, "plain")
    index = os.path.join(inst.prefix, "share", "ament_index", "resource_index", "packages")
    assert os.path.isfile(os.path.join(index, PACKAGE))
    for kind, source in (("config", "config"), ("scenarios", "scenarios"),
                         ("schemas", os.path.join("docs", "schemas")), ("launch", "launch")):
        src_dir = os.path.join(ROOT, source)
        expected = source_files(src_dir)      # config/sros2/ holds the SROS2 template
        assert source_files(inst.share(kind)) == expected, kind
        for name in expected:   # the very bytes of the source files
            with open(os.path.join(src_dir, name), "rb") as a, \
                    open(inst.share(kind, name), "rb") as b:
                assert a.read() == b.read(), (kind, name)
    for exe in ("helpaware", "helpaware_decider", "example_perception",
                "example_behaviour_layer", "example_ask_delivery"):
        assert os.access(inst.executable(exe), os.X_OK), exe


PROBE = """
import json, os
import helpaware_node
from helpaware_node import package_data
from helpaware_node.ros import launch_config
print(json.dumps({"module": os.path.realpath(helpaware_node.__file__),
                  "command": launch_config.command(params="hospital_night.yaml"),
                  "scenarios": package_data.data_dir("scenarios"),
                  "schemas": package_data.data_dir("schemas"),
                  "example": launch_config.example("example_ask_delivery").command()[0]}))
"""


def where_installed_code_looks(inst, cwd):
    out = subprocess.run([sys.executable, "-c", PROBE], env=inst.env(), cwd=cwd,
                         capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr[-3000:]
    return json.loads(out.stdout.strip().splitlines()[-1])


@pytest.mark.parametrize("variant", VARIANTS)
def test_installed_code_finds_its_executable_and_data_in_the_install(colcon_builds, variant,
                                                                     tmp_path):
    inst = installed(colcon_builds, variant)
    found = where_installed_code_looks(inst, str(tmp_path))
    # the code imported is the workspace's, not the venv's editable source
    assert found["module"].startswith(inst.workspace + os.sep)
    assert found["command"][0] == inst.executable("helpaware_decider")
    assert found["example"] == inst.executable("example_ask_delivery")
    params = found["command"][found["command"].index("--params-file") + 1]
    assert params == inst.share("config", "hospital_night.yaml")
    assert found["scenarios"] == inst.share("scenarios")
    assert found["schemas"] == inst.share("schemas")


def test_installed_node_answers_a_help_need(colcon_builds, tmp_path):
    inst = installed(colcon_builds, "plain")
    env = inst.env()
    command = where_installed_code_looks(inst, str(tmp_path))["command"]
    node = subprocess.Popen(command, env=env, cwd=str(tmp_path), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    try:
        drv = subprocess.run([sys.executable, DRIVER, "people", ""], env=env, cwd=str(tmp_path),
                             capture_output=True, text=True, timeout=240)
        # read once it has run (before exec, /proc shows the parent's start-up environment)
        with open(f"/proc/{node.pid}/environ", "rb") as fh:
            node_env = dict(x.split(b"=", 1) for x in fh.read().split(b"\0") if b"=" in x)
        assert node_env[b"ROS_AUTOMATIC_DISCOVERY_RANGE"] == b"LOCALHOST"
        assert node_env[b"ROS_DOMAIN_ID"].decode() == os.environ["ROS_DOMAIN_ID"]
        lines = [json.loads(x) for x in drv.stdout.splitlines() if x.startswith("{")]
        assert lines and lines[-1].get("done"), drv.stderr[-3000:]
        decisions = [x for x in lines if "action" in x]
        assert decisions and decisions[0]["action"] == "ask", drv.stderr[-2000:]
        assert decisions[0]["person_id"] == "nurse-a"
        # it decided under the installed site file, read here with plain YAML
        with open(inst.share("config", "hospital_night.yaml")) as fh:
            site = next(iter(yaml.safe_load(fh).values()))["ros__parameters"]
        from helpaware_node import wire
        _model, config = wire.recorded_params(decisions[0])
        assert config.continue_costs_s["door"] == site["continue_cost_s.door"]
    finally:
        node.send_signal(signal.SIGINT)
        try:
            _out, err = node.communicate(timeout=30)
        except subprocess.TimeoutExpired:
            node.kill()
            _out, err = node.communicate()
    assert node.returncode == 0, err[-2000:]
    assert "Traceback" not in err


def test_simulate_runs_from_the_install_alone(colcon_builds, tmp_path):
    """`ros2 run helpaware_node helpaware simulate hospital_night` starts this executable."""
    inst = installed(colcon_builds, "plain")
    out_dir = tmp_path / "sim"
    proc = subprocess.run([inst.executable("helpaware"), "simulate", "hospital_night",
                           "--seeds", "1", "--policies", "ours", "never", "--no-plots",
                           "--quiet", "--out", str(out_dir)],
                          env=inst.env(), cwd=str(tmp_path), capture_output=True, text=True,
                          timeout=300)
    assert proc.returncode == 0, proc.stderr[-3000:]
    assert "scenario hospital_night:" in proc.stdout
    with open(out_dir / "results.json") as fh:
        assert json.load(fh)["scenario"] == "hospital_night"
