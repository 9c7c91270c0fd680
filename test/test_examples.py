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

"""The example stand-ins of docs/integration.md work against the decision node.

The example stand-ins of docs/integration.md (helpaware_node/ros/examples/) work against the
decision node, in-process as users' own tests would start them.
"""
from helpaware_node.core.belief import Belief
from helpaware_node.ros.examples import AskDelivery, BehaviourLayer, PerceptionStandIn
from helpaware_node.ros.examples.perception import parse_people
from node_harness import Rig
import pytest
from rclpy.parameter import Parameter


def test_behaviour_layer_and_ask_delivery_close_the_loop(ctx):
    ns = "/examples"
    rig = Rig(ctx, namespace=ns)
    behaviour = BehaviourLayer(context=ctx, namespace=ns)
    answers = {"nurse-a": "helped"}
    delivery = AskDelivery(lambda pid: answers.get(pid, "declined"), context=ctx, namespace=ns)
    rig.executor.add_node(behaviour)
    rig.executor.add_node(delivery)
    try:
        assert rig.connected()
        # the stand-ins hear the node's decisions too (the harness's own subscription and
        # theirs: three matched), or a decision before their match is lost
        assert rig.spin_until(lambda: behaviour.task_pub.get_subscription_count() > 0
                              and delivery.outcome_pub.get_subscription_count() > 0
                              and rig.node.decision_pub.get_subscription_count() >= 3)
        assert rig.show_people([{"id": "nurse-a", "distance_m": 2.0, "busyness": 0.1}])
        rid = behaviour.open_need("handover", urgency=1.0)
        assert rig.spin_until(lambda: rid in behaviour.finished and not rig.node.session.needs)
        assert behaviour.finished[rid] == "resolved"
        assert delivery.delivered == [(rid, "nurse-a", "helped")]
        key = rig.node.store.key_for("nurse-a")
        assert rig.node.session.memory.records[key].belief == Belief(3.0, 2.0)
        # nobody in view: the node says continue and the behaviour layer gives the need up
        rig.node.session.seen.clear()
        rid2 = behaviour.open_need("door")
        assert rig.spin_until(lambda: rid2 in behaviour.finished)
        assert behaviour.finished[rid2] == "cancelled"
    finally:
        behaviour.destroy_node()
        delivery.destroy_node()
        rig.close()


def test_perception_stand_in_shows_its_people_to_the_node(ctx):
    ns = "/examples_perception"
    rig = Rig(ctx, namespace=ns)
    people = ["nurse-x,1.5,0.25,charting", "porter-y,4.0,0.0,"]
    seer = PerceptionStandIn(context=ctx, namespace=ns, parameter_overrides=[
        Parameter("people", value=people), Parameter("rate_hz", value=10.0)])
    rig.executor.add_node(seer)
    try:
        assert rig.spin_until(lambda: {"nurse-x", "porter-y"} <= set(rig.node.session.seen))
        seen = rig.node.session.seen["nurse-x"].person
        assert (seen.distance_m, seen.busyness) == (1.5, 0.25)
    finally:
        seer.destroy_node()
        rig.close()


@pytest.mark.parametrize("entry, field", [
    ("nurse-x,1.5,0.25", "'id,distance_m,busyness,activity'"),
    (",1.5,0.25,idle", "'id,distance_m,busyness,activity'"),
    ("nurse-x,near,0.25,idle", "must be numbers"),
    ("nurse-x,1.5,1.25,idle", "busyness 1.25 must be in [0, 1]"),
])
def test_perception_stand_in_names_the_bad_entry(entry, field):
    with pytest.raises(ValueError) as err:
        parse_people(["porter-y,4.0,0.0,idle", entry])
    assert str(err.value).startswith("people[1]: ") and field in str(err.value)


def test_stand_ins_refuse_out_of_range_parameters(ctx):
    with pytest.raises(ValueError, match="answer: 'maybe' is not one of helped"):
        AskDelivery(context=ctx, parameter_overrides=[Parameter("answer", value="maybe")])
    with pytest.raises(ValueError, match=r"stuck_period_s: -1 is outside the allowed range"):
        BehaviourLayer(stuck_period_s=-1.0, context=ctx)
