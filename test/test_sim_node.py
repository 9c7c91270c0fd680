"""The simulator's decision for a scripted need equals the node's for the same inputs.

The node is built in-process (no spinning, no traffic): its people, records, robot asks and
clock are set to the scripted values and its own `_decide` runs; the simulator's SimRobot gets
the same records, people and parameters (the node's own model and config).
"""
from __future__ import annotations

import pytest

rclpy = pytest.importorskip("rclpy")

from helpaware_node import wire  # noqa: E402
from helpaware_node.core import OutcomeEvent, PersonRecord, Result, note_ask, note_outcome  # noqa: E402
from helpaware_node.core.policy import choose_lookahead  # noqa: E402
from helpaware_node.ros.node import HelpAwareNode, OpenNeed, Seen  # noqa: E402
from helpaware_node.sim.run import SimRobot  # noqa: E402
from helpaware_node.sim.world import SeenPerson, SimNeed  # noqa: E402
from helpaware_node.core import HelpNeed  # noqa: E402

NOW = 7200.0


@pytest.fixture(scope="module")
def node():
    context = rclpy.Context()
    rclpy.init(context=context)
    n = HelpAwareNode(context=context)
    yield n
    n.destroy_node()
    rclpy.shutdown(context=context)


def test_node_and_simulator_make_the_same_decision(node):
    model, config = node.params.model, node.params.config
    helped = note_outcome(note_ask(PersonRecord.new(model), 1000.0, model),
                          OutcomeEvent(1000.0, Result.HELPED, 0.2, 0.0, "s/1"), model)
    declined = note_outcome(note_ask(PersonRecord.new(model), 2000.0, model),
                            OutcomeEvent(2000.0, Result.DECLINED, 0.5, 0.0, "s/2"), model)
    script = [("ann", 3.0, 0.4, "charting", helped), ("bo", 1.5, 0.1, "idle", declined),
              ("cy", 1.0, 0.95, "with_patient", PersonRecord.new(model)),
              ("di", 5.0, 0.2, "idle", PersonRecord.new(model))]
    if not node._active:
        pytest.skip("node did not activate on its own (autostart off)")
    node.now_s = lambda: NOW
    node.robot_ask_times_s = [2000.0]
    node.seen.clear()
    robot = SimRobot(model, config)
    robot.robot_asks = [2000.0]
    for pid, dist, busy, act, rec in script:
        key = node.store.key_for(pid) if node.store is not None else pid
        node.seen[pid] = Seen(wire.SeenPerson(pid, dist, busy, act, None), key, NOW, "base_link")
        node.records[key] = rec
        robot.records[pid] = rec
    need = HelpNeed("scripted-1", "door", NOW, continue_cost_s=150.0, help_time_s=15.0)
    node._decide(OpenNeed(need))
    doc = node.last_decision
    sim_need = SimNeed("scripted-1", NOW, "door", 150.0, 15.0,
                       tuple(SeenPerson(p, d, b, a) for p, d, b, a, _ in script), 0.5, 0.5)
    sim = robot.decide(sim_need, choose_lookahead, "lookahead")
    assert doc is not None
    assert (doc["action"], doc["person_id"], doc["why"]) == (sim.action, sim.person_id, sim.why)
    assert doc["params_hash"] == sim.evaluation.params_hash
    assert doc["rationale"] == sim.rationale()
    assert sim.action == "ask"  # the script has a positive score, so the check is not vacuous
