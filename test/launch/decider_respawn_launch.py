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

"""launch_testing: helpaware.launch.py with respawn:=true comes back after a SIGKILL.

The first process asks nurse-a, who declines; it is killed with SIGKILL; launch starts it
again; the new process, on the same store, decides with nurse-a's belief exactly as it was
after the decline, and finally stops cleanly on launch's SIGINT.
"""
import os
import signal
import sys
import unittest

sys.path.insert(0, os.path.dirname(__file__))
from helpaware_node import wire  # noqa: E402
from launch.events.process import ProcessStarted  # noqa: E402
from probe import clean_shutdown_test, described_launch, Probe  # noqa: E402
import pytest  # noqa: E402
from std_msgs.msg import String  # noqa: E402


@pytest.mark.launch_test
def generate_test_description():
    return described_launch("helpaware.launch.py", {"respawn": "true", "respawn_delay_s": "1.0"})


def decisions_for(probe, request_id):
    return [d for d in probe.decisions if d.get("request_id") == request_id]


def belief_of(decision, person_id):
    """Return (a, b) of a person as the decision used it."""
    row = next(c for c in decision["candidates"] if c["person_id"] == person_id)
    return (row["a"], row["b"])


def started_pid(proc_info, action):
    event = proc_info[action]
    return event.pid if isinstance(event, ProcessStarted) else None


class TestRespawn(unittest.TestCase):

    def test_comes_back_after_sigkill_with_what_it_learned(self, proc_info):
        probe = Probe()
        try:
            self.assertTrue(probe.wait_for_decider("/helpaware_decider"), probe.node_names())
            first = probe.decide("respawn-1")
            self.assertIsNotNone(first, "no decision within 60 s")
            self.assertEqual((first["action"], first["person_id"]), ("ask", "nurse-a"))
            prior = belief_of(first, "nurse-a")
            probe.outcome_pub.publish(String(data=wire.outcome_document(
                "respawn-1", "nurse-a", "declined")))
            self.assertTrue(probe.spin_until(lambda: len(decisions_for(probe, "respawn-1")) > 1),
                            "no second decision after the decline")
            learned = belief_of(decisions_for(probe, "respawn-1")[1], "nurse-a")
            # a decline lowers the mean (DESIGN.md section 3 invariant)
            self.assertLess(learned[0] / sum(learned), prior[0] / sum(prior))
            (action,) = proc_info.processes()
            pid = started_pid(proc_info, action)
            self.assertIsNotNone(pid)
            os.kill(pid, signal.SIGKILL)
            with proc_info.proc_event:    # launch's own record of the restart
                restarted = proc_info.proc_event.wait_for(
                    lambda: started_pid(proc_info, action) not in (None, pid),
                    timeout=60)
            self.assertTrue(restarted, "not started again within 60 s of the SIGKILL")
            # A new participant talks to the respawned node: a long-lived Fast DDS publisher
            # can stay unheard for a while by a node respawned on its old shared-memory port
            # (issue 19, handled there); this test is about launch's respawn and the store.
            probe.close()
            probe = Probe()
            self.assertTrue(probe.wait_for_decider("/helpaware_decider"))
            again = probe.decide("respawn-2")
            self.assertIsNotNone(again, "the respawned node did not decide within 60 s")
            # what it learned before the kill is what it decides with after the respawn
            self.assertEqual(belief_of(again, "nurse-a"), learned)
        finally:
            probe.close()


TestShutdown = clean_shutdown_test()
