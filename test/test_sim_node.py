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

"""The simulator's decision for a scripted need equals the node's for the same inputs.

Both drive a help session: the node its own (SQLite store, wire people, the node's document
building), the simulator one on a MemoryStore with its own people. Each store gets the same
history (one helped, one declined, the robot's asks), the node's session the scripted people
and need through its own event methods, and the published document is compared with the
simulator's decision field by field.
"""
from __future__ import annotations

import pytest

rclpy = pytest.importorskip("rclpy")

# I100: these come after pytest.importorskip("rclpy"), so after the pytest import
from helpaware_node import wire  # noqa: E402,I100
from helpaware_node.core import HelpNeed, Result  # noqa: E402
from helpaware_node.ros.node import HelpAwareNode  # noqa: E402
from helpaware_node.session import HelpSession  # noqa: E402
from helpaware_node.sim.run import open_sim_need, SIM_ROBOT_ID  # noqa: E402
from helpaware_node.sim.world import SeenPerson, SimNeed  # noqa: E402
from helpaware_node.store import AskEvent, MemoryStore, StoredEvent  # noqa: E402

NOW = 7200.0
SCRIPT = [("ann", 3.0, 0.4, "charting"), ("bo", 1.5, 0.1, "idle"),
          ("cy", 1.0, 0.95, "with_patient"), ("di", 5.0, 0.2, "idle")]


@pytest.fixture(scope="module")
def node(tmp_path_factory):
    # a store of its own: a module fixture starts before the per-test ROS home is set
    from rclpy.parameter import Parameter
    store = tmp_path_factory.mktemp("sim_node") / "beliefs.sqlite3"
    context = rclpy.Context()
    rclpy.init(context=context)
    n = HelpAwareNode(context=context, parameter_overrides=[
        Parameter("store_path", value=str(store)), Parameter("robot_id", value="r-sim")])
    yield n
    n.destroy_node()
    rclpy.shutdown(context=context)


def _history(store, robot_id: str) -> None:
    """Store the history: ann helped at 1000 s, bo declined at 2000 s (busy), both asked here."""
    ann, bo = store.key_for("ann"), store.key_for("bo")
    store.append(StoredEvent(f"{robot_id}/901", ann, 1000.0, Result.HELPED, 0.2, 0.0))
    store.append(StoredEvent(f"{robot_id}/902", bo, 2000.0, Result.DECLINED, 0.5, 0.0))
    store.append_asks([AskEvent(f"{robot_id}/903", ann, 1000.0, "door", "old-1"),
                       AskEvent(f"{robot_id}/904", bo, 2000.0, "door", "old-2")])


def test_node_and_simulator_make_the_same_decision(node):
    if not node._active:
        pytest.skip("node did not activate on its own (autostart off)")
    model, config = node.params.model, node.params.config
    _history(node.store, node.store.robot_id)
    node.session.robot_ask_times_s = [1000.0, 2000.0]      # as loaded at a start at NOW
    node.session.people_seen([wire.SeenPerson(p, d, b, a, None) for p, d, b, a in SCRIPT],
                             NOW, "base_link")
    need = HelpNeed("scripted-1", "door", NOW, continue_cost_s=150.0, help_time_s=15.0)
    node._apply(node.session.need_opened(need, NOW))
    doc = node.last_decision

    sim_store = MemoryStore(robot_id=SIM_ROBOT_ID)
    _history(sim_store, SIM_ROBOT_ID)
    session = HelpSession(sim_store, model, config, now_s=NOW)
    sim_need = SimNeed("scripted-1", NOW, "door", 150.0, 15.0,
                       tuple(SeenPerson(p, d, b, a) for p, d, b, a in SCRIPT), (0.5,), (0.5,))
    [out] = open_sim_need(session, sim_need).decisions
    sim = out.decision
    assert doc is not None
    assert (doc["action"], doc["person_id"], doc["why"]) == (sim.action, sim.person_id, sim.why)
    assert doc["params_hash"] == sim.evaluation.params_hash
    assert doc["rationale"] == sim.rationale()
    assert out.robot_ask_times_s == (1000.0, 2000.0)    # the documents keep the last hour
    # the script has a positive score, so the check is not vacuous; history counted: ann's
    # help and bo's decline are in the beliefs both sides used
    assert sim.action == "ask"
    rows = {r["person_id"]: r for r in doc["rationale"]}
    assert rows["ann"]["a"] == model.prior_a + 1.0 and rows["bo"]["b"] > model.prior_b
