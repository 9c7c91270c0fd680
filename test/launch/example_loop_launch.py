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

"""launch_testing: example_loop.launch.py, installed: the decider and the three stand-ins.

The behaviour layer opens a need, the decider asks someone the perception stand-in shows, the
ask delivery answers helped, and the behaviour layer resolves the need: the whole loop, from
the topics. All four processes stop cleanly on launch's SIGINT.
"""
import os
import sys
import unittest

sys.path.insert(0, os.path.dirname(__file__))
import launch_testing  # noqa: E402
from probe import assert_clean_shutdown, described_launch, Probe  # noqa: E402
import pytest  # noqa: E402

STAND_IN_PEOPLE = {"nurse-ward3-a", "porter-b", "doctor-c"}   # ros/examples/perception.py


@pytest.mark.launch_test
def generate_test_description():
    return described_launch("example_loop.launch.py",
                            {"namespace": "loop", "stuck_period_s": "2.0"})


class TestLoop(unittest.TestCase):

    def test_a_need_goes_round_the_loop(self):
        probe = Probe("/loop")
        try:
            def closed():
                asked = {d["request_id"]: d["person_id"] for d in probe.decisions
                         if d.get("action") == "ask"}
                helped = {o["request_id"] for o in probe.outcomes
                          if o.get("result") == "helped" and o["request_id"] in asked}
                return [t for t in probe.tasks
                        if t.get("state") == "resolved" and t["request_id"] in helped]
            self.assertTrue(probe.spin_until(closed, 90), (probe.decisions[-1:], probe.tasks))
            rid = closed()[0]["request_id"]
            asked = next(d for d in probe.decisions if d["request_id"] == rid)
            self.assertIn(asked["person_id"], STAND_IN_PEOPLE)
            self.assertTrue(rid.startswith("behaviour_layer-"))
        finally:
            probe.close()


@launch_testing.post_shutdown_test()
class TestShutdown(unittest.TestCase):

    def test_all_four_stop_cleanly(self, proc_info, proc_output):
        self.assertEqual(len(list(proc_info.processes())), 4)
        assert_clean_shutdown(self, proc_info, proc_output)
