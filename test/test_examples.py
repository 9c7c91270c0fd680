"""The two example nodes of docs/integration.md work against the decision node."""
import importlib.util
import os

import pytest
from std_msgs.msg import String

from helpaware_node import wire
from helpaware_node.core.belief import Belief

from node_harness import Rig

EXAMPLES = os.path.join(os.path.dirname(__file__), "..", "examples")


def _load(name):
    spec = importlib.util.spec_from_file_location(name, os.path.join(EXAMPLES, f"{name}.py"))
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_behaviour_layer_and_ask_delivery_close_the_loop(ctx):
    ns = "/examples"
    rig = Rig(ctx, namespace=ns)
    behaviour = _load("behaviour_layer").BehaviourLayer(context=ctx, namespace=ns)
    answers = {"nurse-a": "helped"}
    delivery = _load("ask_delivery").AskDelivery(lambda pid: answers.get(pid, "declined"),
                                                 context=ctx, namespace=ns)
    rig.executor.add_node(behaviour)
    rig.executor.add_node(delivery)
    try:
        assert rig.connected()
        assert rig.spin_until(lambda: behaviour.task_pub.get_subscription_count() > 0
                              and delivery.outcome_pub.get_subscription_count() > 0)
        assert rig.show_people([{"id": "nurse-a", "distance_m": 2.0, "busyness": 0.1}])
        rid = behaviour.open_need("handover", urgency=1.0)
        assert rig.spin_until(lambda: rid in behaviour.finished and not rig.node.session.needs)
        assert behaviour.finished[rid] == "resolved"
        assert delivery.delivered == [(rid, "nurse-a", "helped")]
        assert rig.node.session.memory.records[rig.node.store.key_for("nurse-a")].belief == Belief(3.0, 2.0)
        # nobody in view: the node says continue and the behaviour layer gives the need up
        rig.node.session.seen.clear()
        rid2 = behaviour.open_need("door")
        assert rig.spin_until(lambda: rid2 in behaviour.finished)
        assert behaviour.finished[rid2] == "cancelled"
    finally:
        behaviour.destroy_node()
        delivery.destroy_node()
        rig.close()
