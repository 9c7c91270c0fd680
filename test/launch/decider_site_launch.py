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

"""launch_testing: helpaware.launch.py with params_file, namespace and a remap, installed.

params_file:=hospital_night.yaml namespace:=ward3 people_topic:=perception/people. The node is
/ward3/helpaware_decider, listens on /ward3/perception/people (and not on /ward3/people), and
decides with the site file's values, read here from the installed file itself.
"""
import os
import sys
import unittest

sys.path.insert(0, os.path.dirname(__file__))
from helpaware_node import wire  # noqa: E402
from probe import clean_shutdown_test, described_launch, Probe  # noqa: E402
import pytest  # noqa: E402
import yaml  # noqa: E402

ARGUMENTS = {"params_file": "hospital_night.yaml", "namespace": "ward3",
             "people_topic": "perception/people"}


@pytest.mark.launch_test
def generate_test_description():
    return described_launch("helpaware.launch.py", ARGUMENTS)


def site_file_values():
    from ament_index_python.packages import get_package_share_directory
    path = os.path.join(get_package_share_directory("helpaware_node"), "config",
                        "hospital_night.yaml")
    with open(path) as fh:
        doc = yaml.safe_load(fh)
    return next(iter(doc.values()))["ros__parameters"]


class TestSiteNamespaceRemap(unittest.TestCase):

    def test_namespace_remap_and_site_parameters(self):
        probe = Probe("/ward3", people_topic="perception/people")
        try:
            self.assertTrue(probe.wait_for_decider("/ward3/helpaware_decider"),
                            probe.node_names())
            subscribers = {i.node_name for i in
                           probe.node.get_subscriptions_info_by_topic("/ward3/perception/people")}
            self.assertIn("helpaware_decider", subscribers)
            self.assertEqual(probe.node.get_subscriptions_info_by_topic("/ward3/people"), [])
            decision = probe.decide("launch-site-1")
            self.assertIsNotNone(decision, "no decision within 60 s")
            site = site_file_values()
            _model, config = wire.recorded_params(decision)
            self.assertEqual(config.continue_costs_s["door"], site["continue_cost_s.door"])
            self.assertEqual(config.min_reask_interval_s, site["min_reask_interval_s"])
        finally:
            probe.close()


TestShutdown = clean_shutdown_test()
