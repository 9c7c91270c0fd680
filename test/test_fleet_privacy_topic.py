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

"""Live opt-out and forget through the privacy topic (in one process, own context).

Signed requests are applied once and answered on the fleet topic; unsigned ones are refused unless
the lab switch is on; stale and foreign ones are refused.
"""
import json
import time

import pytest

rclpy = pytest.importorskip("rclpy")
# I100: these come after pytest.importorskip("rclpy"), so after the pytest import
from helpaware_node.core import Result  # noqa: E402,I100
from helpaware_node.core.model import CoreInputError  # noqa: E402
from helpaware_node.fleet_documents import (  # noqa: E402
    decode_document,
    encode_document,
    parse_unsigned_request,
    PrivacyAct,
    REQUEST_MAX_AGE_S,
)
from helpaware_node.ros.fleet import fleet_qos, FLEET_TOPIC, FleetLink  # noqa: E402
from helpaware_node.ros.privacy import PRIVACY_QOS, PRIVACY_TOPIC, PrivacyRequests  # noqa: E402
from helpaware_node.store import SiteKeys, SqliteStore, StoredEvent  # noqa: E402
from rclpy.context import Context  # noqa: E402
from rclpy.executors import SingleThreadedExecutor  # noqa: E402
from std_msgs.msg import String  # noqa: E402

SITE_KEY = b"p" * 32


def spin_until(executor, condition, deadline_s=15.0):
    end = time.monotonic() + deadline_s
    while time.monotonic() < end and not condition():
        executor.spin_once(timeout_sec=0.05)
    return condition()


def test_unsigned_parse_refuses_bad_requests():
    with pytest.raises(CoreInputError, match="action"):
        parse_unsigned_request({"action": "delete", "person_id": "x"}, str, "privacy_request")
    with pytest.raises(CoreInputError, match="person_id"):
        parse_unsigned_request({"action": "forget"}, str, "privacy_request")
    with pytest.raises(CoreInputError, match="64 hex"):
        parse_unsigned_request({"action": "forget", "person_key": "nurse"}, str,
                               "privacy_request")


class Robot:
    """One store, fleet link and privacy topic on a node of its own context."""

    def __init__(self, tmp_path, allow_unsigned=False):
        self.store = SqliteStore(tmp_path / "b.sqlite3", "r1", SITE_KEY)
        self.ka, self.kb = self.store.key_for("nurse-anna"), self.store.key_for("porter-bo")
        for i, k in enumerate([self.ka, self.kb, self.ka]):
            self.store.append(StoredEvent(self.store.next_event_id(), k, float(i),
                                          Result.HELPED, 0.1, 0.0))
        self.ctx = Context()
        rclpy.init(context=self.ctx)
        self.node = rclpy.create_node("privacy_test", context=self.ctx)
        self.executor = SingleThreadedExecutor(context=self.ctx)
        self.executor.add_node(self.node)
        self.applied, self.fleet_heard = [], []
        self.link = FleetLink(self.node, self.store, replay=False)
        self.privacy = PrivacyRequests(self.node, self.store, self.link,
                                       lambda action, key: self.applied.append((action, key)),
                                       allow_unsigned=allow_unsigned)
        self.node.create_subscription(String, FLEET_TOPIC,
                                      lambda m: self.fleet_heard.append(m.data), fleet_qos())
        self.pub = self.node.create_publisher(String, PRIVACY_TOPIC, PRIVACY_QOS)
        assert spin_until(self.executor, lambda: self.pub.get_subscription_count() > 0)

    def send(self, text, until):
        self.pub.publish(String(data=text))
        return spin_until(self.executor, until)

    def close(self):
        self.executor.shutdown(timeout_sec=1.0)
        self.node.destroy_node()
        rclpy.try_shutdown(context=self.ctx)
        self.store.close()


def request(action, key, issued_s=None, keys=None):
    act = PrivacyAct.new(action, key, "console@desk", issued_s=issued_s)
    return act, encode_document(action, act, keys or SiteKeys.single(SITE_KEY).key_ring())


def test_signed_requests_take_effect_once_and_are_answered_on_the_fleet_topic(tmp_path):
    robot = Robot(tmp_path)
    keys = robot.link.keys
    try:
        opt, text = request("opt_out", robot.kb)
        assert robot.send(text, lambda: robot.store.is_opted_out(robot.kb))
        forget, text2 = request("forget", robot.ka)
        assert robot.send(text2, lambda: robot.ka not in robot.store.keys())
        assert robot.applied == [("opt_out", robot.kb), ("forget", robot.ka)]
        answers = lambda: [decode_document(t, keys)[1] for t in robot.fleet_heard]  # noqa: E731
        assert spin_until(robot.executor, lambda: {a.request_id for a in answers()}
                          >= {opt.act_id, forget.act_id})
        mine = [a for a in answers() if a.request_id in (opt.act_id, forget.act_id)]
        assert {(a.action, a.person_key, a.sender) for a in mine} == {
            ("opt_out", robot.kb, "r1"), ("forget", robot.ka, "r1")}
        assert all("nurse-anna" not in t and "porter-bo" not in t for t in robot.fleet_heard)
        # the same request again (a replay, or a peer's answer coming back): applied once
        n = robot.link.acts_applied
        robot.pub.publish(String(data=text))
        assert spin_until(robot.executor, lambda: robot.privacy.duplicate_count == 1)
        assert robot.link.acts_applied == n and robot.privacy.applied_count == 2
        assert robot.privacy.refused_count == 0
    finally:
        robot.close()


def test_unsigned_requests_are_refused_by_default_and_change_nothing(tmp_path):
    robot = Robot(tmp_path)
    try:
        for text in (json.dumps({"action": "opt_out", "person_id": "porter-bo"}),
                     json.dumps({"action": "forget", "person_key": robot.ka})):
            n = robot.privacy.refused_count
            assert robot.send(text, lambda: robot.privacy.refused_count == n + 1)
        assert robot.privacy.refusals["unsigned"] == 2
        assert "allow_unsigned_privacy_requests:=true" in robot.privacy.last_refusal
        assert "helpaware privacy" in robot.privacy.last_refusal
        assert not robot.store.is_opted_out(robot.kb) and robot.ka in robot.store.keys()
        assert robot.applied == [] and robot.privacy._refused.lines == 1    # logged once
        # stale, foreign and wrongly signed requests are refused too
        _, old = request("opt_out", robot.kb, issued_s=time.time() - REQUEST_MAX_AGE_S - 60)
        _, foreign = request("opt_out", robot.kb, keys=SiteKeys.single(b"q" * 32).key_ring())
        forged = json.loads(request("opt_out", robot.kb)[1])
        forged["person_key"] = robot.ka
        for text in (old, foreign, json.dumps(forged)):
            n = robot.privacy.refused_count
            assert robot.send(text, lambda: robot.privacy.refused_count == n + 1)
        assert robot.privacy.refusals["other_site"] == 1
        assert robot.privacy.refusals["bad_signature"] == 1
        assert robot.privacy.refusals["malformed"] == 1           # the stale one
        assert not robot.store.is_opted_out(robot.kb) and not robot.store.is_opted_out(robot.ka)
        values = robot.privacy.diagnostic_values()
        assert values["privacy_request.refused.unsigned"] == 2
        assert values["privacy_request.allow_unsigned_privacy_requests"] is False
    finally:
        robot.close()


def test_the_lab_switch_lets_unsigned_requests_through(tmp_path):
    robot = Robot(tmp_path, allow_unsigned=True)
    try:
        assert robot.send(json.dumps({"action": "opt_out", "person_id": "porter-bo"}),
                          lambda: robot.store.is_opted_out(robot.kb))
        assert robot.applied == [("opt_out", robot.kb)] and robot.privacy.refused_count == 0
    finally:
        robot.close()
