"""Live opt-out and forget through the privacy_request topic (in one process, own context)."""
import json
import time

import pytest

rclpy = pytest.importorskip("rclpy")
from rclpy.context import Context  # noqa: E402
from rclpy.executors import SingleThreadedExecutor  # noqa: E402
from std_msgs.msg import String  # noqa: E402

from helpaware_node.core import Result  # noqa: E402
from helpaware_node.core.model import CoreInputError  # noqa: E402
from helpaware_node.ros.fleet import (FLEET_TOPIC, PRIVACY_TOPIC, FleetLink,  # noqa: E402
                                      PrivacyRequests, fleet_qos, parse_privacy_request)
from helpaware_node.store import SqliteStore, StoredEvent  # noqa: E402


def spin_until(executor, condition, deadline_s=15.0):
    end = time.monotonic() + deadline_s
    while time.monotonic() < end and not condition():
        executor.spin_once(timeout_sec=0.05)
    return condition()


def test_parse_refuses_bad_requests():
    with pytest.raises(CoreInputError, match="action"):
        parse_privacy_request('{"action": "delete", "person_id": "x"}', str)
    with pytest.raises(CoreInputError, match="person_id"):
        parse_privacy_request('{"action": "forget"}', str)
    with pytest.raises(CoreInputError, match="64 hex"):
        parse_privacy_request('{"action": "forget", "person_key": "nurse"}', str)


def test_topic_opt_out_and_forget_take_effect_and_forget_reaches_the_fleet(tmp_path):
    store = SqliteStore(tmp_path / "b.sqlite3", "r1", b"p" * 32)
    ka, kb = store.key_for("nurse-anna"), store.key_for("porter-bo")
    for i, k in enumerate([ka, kb, ka]):
        store.append(StoredEvent(store.next_event_id(), k, float(i), Result.HELPED, 0.1, 0.0))
    ctx = Context()
    rclpy.init(context=ctx)
    node = rclpy.create_node("privacy_test", context=ctx)
    executor = SingleThreadedExecutor(context=ctx)
    executor.add_node(node)
    try:
        applied, fleet_heard = [], []
        link = FleetLink(node, store)
        PrivacyRequests(node, store, link, lambda action, key: applied.append((action, key)))
        node.create_subscription(String, FLEET_TOPIC, lambda m: fleet_heard.append(m.data),
                                 fleet_qos())
        pub = node.create_publisher(String, PRIVACY_TOPIC, 10)
        assert spin_until(executor, lambda: pub.get_subscription_count() > 0)
        pub.publish(String(data=json.dumps({"action": "opt_out", "person_id": "porter-bo"})))
        assert spin_until(executor, lambda: store.is_opted_out(kb))
        pub.publish(String(data=json.dumps({"action": "forget", "person_id": "nurse-anna"})))
        assert spin_until(executor, lambda: ka not in store.keys())
        assert applied == [("opt_out", kb), ("forget", ka)]
        assert spin_until(executor, lambda: any('"forget"' in t for t in fleet_heard))
        assert all("nurse-anna" not in t and "porter-bo" not in t for t in fleet_heard)
    finally:
        executor.shutdown(timeout_sec=1.0)
        node.destroy_node()
        rclpy.try_shutdown(context=ctx)
        store.close()
