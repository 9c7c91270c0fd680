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

"""Refusals on the fleet and privacy topics reach /diagnostics like the main inputs.

Counted, by reason, the last reason shown, and the status WARN for the period they happened in.
"""
import json

from diagnostic_msgs.msg import DiagnosticStatus
from helpaware_node.ros.fleet import fleet_qos, FLEET_TOPIC
from helpaware_node.ros.privacy import PRIVACY_QOS, PRIVACY_TOPIC
from node_harness import Rig
from std_msgs.msg import String


def test_fleet_and_privacy_refusals_are_reported(ctx):
    rig = Rig(ctx, namespace="/sidediag", store_path="memory")
    try:
        assert rig.connected()
        fleet_pub = rig.driver.create_publisher(String, FLEET_TOPIC, fleet_qos())
        privacy_pub = rig.driver.create_publisher(String, PRIVACY_TOPIC, PRIVACY_QOS)
        assert rig.spin_until(lambda: fleet_pub.get_subscription_count() > 0
                              and privacy_pub.get_subscription_count() > 0)
        fleet_pub.publish(String(data='{"v": 1, "kind": "outcome", "person_key": "nurse-a"}'))
        fleet_pub.publish(String(data=json.dumps({"v": 2, "kind": "outcome"})))
        privacy_pub.publish(String(data='{"action": "shout", "person_id": "nurse-a"}'))

        def reported():
            for arr in rig.diagnostics:
                for s in arr.status:
                    v = {x.key: x.value for x in s.values}
                    if (v.get("fleet_outcomes.rejected") == "2"
                            and v.get("privacy_request.rejected") == "1"):
                        return s
            return None
        assert rig.spin_until(lambda: reported() is not None)
        status = reported()
        values = {x.key: x.value for x in status.values}
        assert values["fleet_outcomes.refused.old_format"] == "1"
        assert values["fleet_outcomes.refused.unsigned"] == "1"
        assert values["privacy_request.refused.unsigned"] == "1"
        assert "unsigned" in values["fleet_outcomes.last_rejection"]
        assert "allow_unsigned_privacy_requests" in values["privacy_request.last_rejection"]
        assert values["fleet.site_id"] == rig.node.store.site_keys.site_id
        assert values["fleet.topic"] == FLEET_TOPIC
        assert status.level == DiagnosticStatus.WARN
    finally:
        rig.close()
