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

"""launch_testing: helpaware.launch.py with its defaults, from the install space.

The decider comes up as /helpaware_decider with the process environment the launch had (DDS on
loopback, this run's domain), answers a help need, and stops cleanly on launch's SIGINT.
Run here by test/installed/test_launch_files.py; on a ROS 2 install:
    launch_test test/launch/decider_defaults_launch.py
"""
import os
import sys
import unittest

sys.path.insert(0, os.path.dirname(__file__))
from probe import clean_shutdown_test, described_launch, Probe, process_environment  # noqa: E402
import pytest  # noqa: E402


@pytest.mark.launch_test
def generate_test_description():
    return described_launch("helpaware.launch.py")


class TestDecider(unittest.TestCase):

    def test_answers_a_help_need_in_the_launch_environment(self, proc_info):
        probe = Probe()
        try:
            self.assertTrue(probe.wait_for_decider("/helpaware_decider"), probe.node_names())
            decision = probe.decide("launch-default-1")
            self.assertIsNotNone(decision, "no decision within 60 s")
            self.assertEqual((decision["action"], decision["person_id"]), ("ask", "nurse-a"))
            # the launched node's own environment keeps the run's DDS settings
            pids = [proc_info[a].pid for a in proc_info.processes()]
            self.assertEqual(len(pids), 1)
            env = process_environment(pids[0])
            self.assertEqual(env.get("ROS_AUTOMATIC_DISCOVERY_RANGE"), "LOCALHOST")
            self.assertEqual(env.get("ROS_DOMAIN_ID"), os.environ["ROS_DOMAIN_ID"])
        finally:
            probe.close()


TestShutdown = clean_shutdown_test()
