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

"""config/fastdds_robot.xml.

What it sets, that Fast DDS loads it without complaint, and that ros/launch_config.py gives it to
the node unless the environment names a profile of its own.
"""
import filecmp
import os
import subprocess
import sys
import xml.etree.ElementTree as ET

from helpaware_node.ros import launch_config
import pytest

NS = {"dds": "http://www.eprosima.com"}
PROFILE = os.path.join(os.path.dirname(__file__), "..", "config", "fastdds_robot.xml")


def test_the_profile_is_the_default_participant_profile_with_quarter_second_announcements():
    root = ET.parse(PROFILE).getroot()
    (participant,) = root.findall("dds:profiles/dds:participant", NS)
    assert participant.get("is_default_profile") == "true"
    period = participant.find("dds:rtps/dds:builtin/dds:discovery_config/dds:leaseAnnouncement",
                              NS)
    assert (int(period.find("dds:sec", NS).text), int(period.find("dds:nanosec", NS).text)) == (
        0, 250_000_000)
    # nothing else is changed: no transports (ignored under LOCALHOST anyway), no lease
    assert root.find(".//dds:userTransports", NS) is None
    assert root.find(".//dds:leaseDuration", NS) is None


def test_launch_config_sets_the_profile_only_when_none_is_named(tmp_path):
    # this source's file, or its copy in an install (under `colcon test` the ament index finds
    # the workspace's install first): the same bytes either way
    assert filecmp.cmp(launch_config.middleware_profile(), PROFILE, shallow=False)
    assert launch_config.profile_environment({}) == {
        "FASTDDS_DEFAULT_PROFILES_FILE": launch_config.middleware_profile()}
    own = str(tmp_path / "site.xml")
    assert launch_config.profile_environment({"FASTDDS_DEFAULT_PROFILES_FILE": own}) == {}
    assert launch_config.profile_environment({"FASTRTPS_DEFAULT_PROFILES_FILE": own}) == {}


@pytest.mark.ros
def test_fast_dds_loads_the_profile_without_an_error():
    code = ("import rclpy; rclpy.init(); n = rclpy.create_node('profile_check'); "
            "n.destroy_node(); rclpy.shutdown(); print('up')")
    env = dict(os.environ, FASTDDS_DEFAULT_PROFILES_FILE=os.path.abspath(PROFILE))
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=60, env=env)
    assert proc.returncode == 0 and proc.stdout.strip() == "up", proc.stderr[-2000:]
    assert "Error" not in proc.stderr, proc.stderr[-2000:]   # Fast DDS: "[XMLPARSER Error]"
    # the check can fail: a broken file is reported on the same stream
    bad = dict(env, FASTDDS_DEFAULT_PROFILES_FILE=os.path.abspath(__file__))
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=60, env=bad)
    assert "Error" in proc.stderr
