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

"""`colcon test` runs the package's tests in a workspace, and `colcon test-result` reads them.

A copy of the source with its tests, as a clone has it, is built and tested the way a ROS 2 user
does it. Only the linter tests run in it (`--pytest-args -m linter`, about half a minute): the
rest of the suite is this run itself. The README ("Testing under colcon") gives the commands.
"""
import os
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET

from installs import build_environment, colcon_command, copy_source, PACKAGE, ROOT
import pytest

TIMEOUT_S = 600


def colcon(workspace, *args):
    proc = subprocess.run([colcon_command(), "--log-base", "log", *args], cwd=workspace,
                          env=build_environment(), capture_output=True, text=True,
                          timeout=TIMEOUT_S)
    return proc.returncode, proc.stdout + proc.stderr


@pytest.mark.slow
def test_colcon_test_runs_the_linter_tests_and_test_result_passes(tmp_path):
    if colcon_command() is None:
        pytest.skip("colcon is not installed here (requirements.txt lists colcon-core, "
                    "colcon-ros, colcon-package-selection, colcon-bash): not tested")
    workspace = str(tmp_path)
    src = os.path.join(workspace, "src", PACKAGE)
    copy_source(src)
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc")
    for folder in ("test", "tools"):   # what a clone has beside the build's own entries
        shutil.copytree(os.path.join(ROOT, folder), os.path.join(src, folder), ignore=ignore)
    shutil.copy2(os.path.join(ROOT, "ruff.toml"), src)

    rc, out = colcon(workspace, "build", "--packages-select", PACKAGE)
    assert rc == 0, out[-3000:]
    rc, out = colcon(workspace, "test", "--packages-select", PACKAGE,
                     "--event-handlers", "console_direct+", "--pytest-args", "-m", "linter")
    assert rc == 0, out[-3000:]
    rc, result = colcon(workspace, "test-result", "--verbose")
    assert rc == 0, result[-3000:]

    summary = re.search(r"Summary: (\d+) tests?, (\d+) errors?, (\d+) failures?", result)
    assert summary, result[-2000:]
    tests, errors, failures = (int(g) for g in summary.groups())
    assert errors == 0 and failures == 0, result[-3000:]
    # the JUnit file colcon wrote names the two linter tests, and neither failed
    cases = ET.parse(os.path.join(workspace, "build", PACKAGE, "pytest.xml")).getroot()
    by_name = {c.get("name"): c for c in cases.iter("testcase")}
    for name in ("test_flake8", "test_pep257"):
        assert name in by_name, sorted(by_name)
        assert by_name[name].find("failure") is None and by_name[name].find("skipped") is None
    assert tests == len(by_name)
