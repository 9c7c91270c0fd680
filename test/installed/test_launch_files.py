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

"""The launch files for real, with launch_testing, against an ament index (issue: launch tests).

Each file in test/launch/ is a launch_testing test; it runs here in its own process with the
install's environment (the colcon install, or a hand-built prefix where colcon is missing), as
`launch_test FILE` runs it on a ROS 2 install. Skipped, with the reason, where launch_testing
is not installed and ../shared/vendor/ros-launch is not there to install it from.
"""
import glob
import os
import re
import subprocess
import sys

import installs
from installs import hand_built_prefix, launch_testing_missing
import pytest

LAUNCH_TESTS = sorted(glob.glob(os.path.join(os.path.dirname(__file__), "..", "launch",
                                             "*_launch.py")))


def run_launch_test(path, install, cwd):
    missing = launch_testing_missing()
    if missing:
        pytest.skip(missing)
    proc = subprocess.run([sys.executable, "-m", "launch_testing.launch_test", path],
                          env=install.env(), cwd=cwd, capture_output=True, text=True,
                          timeout=400)
    return proc.returncode, proc.stdout + proc.stderr


def test_every_launch_file_has_a_launch_test():
    shipped = sorted(os.listdir(os.path.join(os.path.dirname(__file__), "..", "..", "launch")))
    assert shipped == ["example_loop.launch.py", "helpaware.launch.py"]
    for name in shipped:
        assert any(f'described_launch("{name}"' in open(p).read() for p in LAUNCH_TESTS), name


@pytest.mark.parametrize("path", LAUNCH_TESTS, ids=[os.path.basename(p) for p in LAUNCH_TESTS])
def test_launch_file(path, ament_install, tmp_path):
    code, out = run_launch_test(path, ament_install, str(tmp_path))
    assert code == 0, f"{ament_install.kind} at {ament_install.prefix}:\n{out[-6000:]}"
    ran = [int(n) for n in re.findall(r"^Ran (\d+) tests? in", out, re.MULTILINE)]
    assert len(ran) == 2 and min(ran) >= 1, out[-3000:]   # active and post-shutdown tests
    # launch stopped every process with SIGINT, and none needed SIGTERM or SIGKILL after it
    assert "sending signal 'SIGINT'" in out, out[-3000:]
    assert "escalating to" not in out, out[-3000:]


def test_launch_file_against_a_hand_built_prefix(tmp_path):
    """Where colcon is missing.

    The launch tests run against a prefix made of the package's marker, package.xml, data and
    executables: that prefix must be one launch_ros accepts.
    """
    prefix = hand_built_prefix(str(tmp_path / "prefix"))
    defaults = next(p for p in LAUNCH_TESTS if p.endswith("decider_defaults_launch.py"))
    code, out = run_launch_test(defaults, prefix, str(tmp_path))
    assert code == 0, out[-6000:]
    # launch_ros found the package through this prefix's index entry and started it
    assert "[helpaware_decider-1]: process started with pid" in out


def test_skip_reason_names_what_is_missing(monkeypatch, tmp_path):
    import importlib.util
    monkeypatch.setattr(importlib.util, "find_spec", lambda name: None)
    monkeypatch.setattr(installs, "VENDOR_LAUNCH", str(tmp_path / "no-such-folder"))
    reason = launch_testing_missing()
    assert "no-such-folder" in reason and "no launch, launch_ros and launch_testing" in reason
    (tmp_path / "no-such-folder").mkdir()
    reason = launch_testing_missing()
    assert "make test` installs it from" in reason and "install.sh" in reason
