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

"""The decision node in-process, driven over real topics with bounded spinning."""
from helpaware_node import wire
from helpaware_node.core import decide
from helpaware_node.core.belief import Belief
from node_harness import Rig
import pytest
from rclpy.parameter import Parameter
from std_msgs.msg import String


@pytest.fixture
def rig(ctx, request):
    params = getattr(request, "param", {})
    r = Rig(ctx, namespace=f"/t{abs(hash(request.node.name)) % 10**6}", **params)
    assert r.connected()
    yield r
    r.close()


TWO = [{"id": "nurse-a", "distance_m": 2.0, "busyness": 0.1, "activity": "charting"},
       {"id": "porter-b", "distance_m": 3.0, "busyness": 0.6, "activity": "walking_fast"}]


def test_two_in_view_asks_the_one_the_core_prefers(rig):
    assert rig.show_people(TWO)
    d = rig.open_need("r1", "handover", urgency=1.0)
    # the same decision rebuilt from the recorded inputs by the core alone
    again = decide(*wire.replay_inputs(d), *wire.recorded_params(d))
    assert d["action"] == "ask" == again.action
    assert d["person_id"] == again.person_id == "nurse-a"   # both at the prior: less busy wins
    scores = {r["person_id"]: r["score_s"] for r in d["rationale"]}
    assert scores["nurse-a"] > scores["porter-b"] > 0
    assert rig.node.session.pending["r1"].person_id == "nurse-a"


@pytest.mark.parametrize("rig", [{"k_load": 0.0}], indirect=True)
def test_outcomes_update_beliefs_by_the_exact_algebra(rig):
    people = [{"id": "a", "distance_m": 1.0, "busyness": 0.0},
              {"id": "b", "distance_m": 2.0, "busyness": 0.0}]
    assert rig.show_people(people)
    d = rig.open_need("r1", "handover", urgency=1.0)
    first = d["person_id"]
    rig.report("r1", first, "helped")
    key = rig.node.store.key_for(first)
    # helped is conjugate: Beta(2, 2) -> Beta(3, 2)
    assert rig.node.session.memory.records[key].belief == Belief(3.0, 2.0)
    assert rig.node.store.events_for(key)[0].result.value == "helped"   # stored first
    d2 = rig.open_need("r2", "handover", urgency=1.0)
    assert d2["action"] == "ask" and d2["person_id"] != first           # re-ask interval
    rig.report("r2", d2["person_id"], "declined")
    # declined at c = exp(0) = 1 is exactly Beta(a, b + 1)
    b2 = rig.node.session.memory.records[rig.node.store.key_for(d2["person_id"])].belief
    assert b2.a == pytest.approx(2.0, rel=1e-9) and b2.b == pytest.approx(3.0, rel=1e-9)


def test_opted_out_person_is_never_asked(rig):
    key = rig.node.store.key_for("nurse-a")
    rig.node.store.opt_out(key)
    assert rig.node.opted_out_keys() == [key]
    assert rig.show_people(TWO)
    for i in range(3):
        d = rig.open_need(f"o{i}", "handover", urgency=1.0)
        assert d["person_id"] != "nurse-a"
        row = next(r for r in d["rationale"] if r["person_id"] == "nurse-a")
        assert row["excluded"] == "opted_out"
        if d["action"] == "ask":
            rig.report(f"o{i}", d["person_id"], "declined")
    assert rig.node.store.events_for(key) == []


def test_parameter_change_flips_the_next_decision(rig):
    assert rig.show_people(TWO)
    assert rig.open_need("p1", "handover", urgency=1.0)["action"] == "ask"
    rig.report("p1", "nurse-a", "could_not_ask")
    [res] = rig.node.set_parameters([Parameter("interruption_weight_s", value=100000.0)])
    assert res.successful
    assert rig.open_need("p2", "handover", urgency=1.0)["action"] == "continue"
    rig.node.set_parameters([Parameter("interruption_weight_s", value=6.0)])
    assert rig.open_need("p3", "handover", urgency=1.0)["action"] == "ask"


def test_pending_asks_unknown_could_not_ask_and_expiry(ctx):
    rig = Rig(ctx, namespace="/pend", pending_ask_timeout_s=1.0, max_asks_per_need=1)
    try:
        assert rig.connected()
        assert rig.show_people(TWO)
        rig.report("nope", "nurse-a", "helped")
        assert rig.node.counters.rejected["outcome"] == 1
        assert "no pending ask" in rig.node.counters.last_reason["outcome"]
        d = rig.open_need("e1", "handover", urgency=1.0)
        key = rig.node.store.key_for(d["person_id"])
        assert rig.spin_until(lambda: rig.node.session.expired_asks == 1, 30)
        # expiry: no evidence
        assert rig.node.session.memory.records[key].belief == Belief(2.0, 2.0)
        d = rig.open_need("e2", "handover", urgency=1.0)
        rig.report("e2", d["person_id"], "could_not_ask")
        assert rig.node.session.could_not_ask == 1
        key = rig.node.store.key_for(d["person_id"])
        assert rig.node.session.memory.records[key].belief == Belief(2.0, 2.0)
        assert rig.node.store.keys() == []
        rig.report("e2", d["person_id"], "helped")                      # no longer pending
        assert rig.node.counters.rejected["outcome"] == 2
    finally:
        rig.close()


def test_sim_time_never_decides_on_time_zero(ctx):
    from rosgraph_msgs.msg import Clock
    rig = Rig(ctx, namespace="/sim", use_sim_time=True)
    try:
        assert rig.connected()
        clock_pub = rig.driver.create_publisher(Clock, "/clock", 10)
        rig.task_pub.publish(String(data=wire.task_status_document("z1", "open", "door")))
        assert rig.spin_until(lambda: "z1" in rig.node.session.needs, 30)
        rig.spin_until(lambda: False, 0.5)
        assert rig.decisions == []                                      # time is still zero

        def tick():
            msg = Clock()
            msg.clock.sec = 5000
            clock_pub.publish(msg)
            return bool(rig.decisions)
        assert rig.spin_until(tick, 30)
        assert rig.decisions[0]["stamp_s"] == pytest.approx(5000.0, abs=1.0)
        assert rig.decisions[0]["need"]["opened_at_s"] > 0
    finally:
        rig.close()


def test_navigation_abort_opens_and_success_resolves(ctx):
    from action_msgs.msg import GoalStatus, GoalStatusArray
    rig = Rig(ctx, namespace="/nav", navigation_status_topic="navigate/_action/status")
    try:
        assert rig.connected()
        pub = rig.driver.create_publisher(GoalStatusArray, "navigate/_action/status", 10)
        assert rig.spin_until(lambda: pub.get_subscription_count() > 0)

        def status(code):
            st = GoalStatus()
            st.goal_info.goal_id.uuid = list(range(16))
            st.status = code
            arr = GoalStatusArray()
            arr.status_list = [st]
            return arr
        pub.publish(status(GoalStatus.STATUS_ABORTED))
        assert rig.spin_until(lambda: bool(rig.decisions))
        assert rig.decisions[0]["need"]["kind"] == "navigation_failure"
        pub.publish(status(GoalStatus.STATUS_ABORTED))      # repeated status: no second need
        pub.publish(status(GoalStatus.STATUS_SUCCEEDED))
        assert rig.spin_until(lambda: not rig.node.session.needs)
        assert len(rig.decisions) == 1
    finally:
        rig.close()


def test_markers_and_diagnostics(rig):
    from diagnostic_msgs.msg import DiagnosticStatus
    from visualization_msgs.msg import Marker, MarkerArray
    got = []
    rig.driver.create_subscription(MarkerArray, "markers", got.append, 10)
    assert rig.show_people(TWO)
    assert rig.spin_until(lambda: any(len(m.markers) == 2 for m in got))
    marks = next(m for m in got if len(m.markers) == 2).markers
    assert {m.type for m in marks} == {Marker.TEXT_VIEW_FACING}
    assert all(m.text.startswith("w=0.50") for m in marks)             # prior mean 2/(2+2)
    rig.node.set_parameters([Parameter("max_observation_age_s", value=0.0)])
    assert rig.spin_until(lambda: any(m.action == Marker.DELETE for a in got for m in a.markers),
                          40)
    rig.outcome_pub.publish(String(data="not json"))

    def warned():
        return any(s.level == DiagnosticStatus.WARN and {v.key: v.value for v in s.values}
                   .get("outcome.rejected") == "1" for a in rig.diagnostics for s in a.status)
    assert rig.spin_until(warned, 30)
    assert isinstance(rig.diagnostics[-1].status[0].level, bytes)


def test_managed_mode_waits_for_transitions(ctx):
    from helpaware_node.ros.node import HelpAwareNode
    node = HelpAwareNode(context=ctx, namespace="/managed",
                         parameter_overrides=[Parameter("autostart", value=False)])
    try:
        assert node.store is None and not node._active          # unconfigured
        node.trigger_configure()
        assert node.store is not None and not node._active      # inactive: no decisions
        from helpaware_node.core import HelpNeed
        step = node.session.need_opened(HelpNeed("m1", "door", 1.0), 1.0)
        assert step.decisions == [] and "m1" in node.session.needs   # kept, not decided
        node.trigger_activate()
        assert node._active
        node.trigger_deactivate()
        node.trigger_cleanup()
        assert node.store is None
    finally:
        node.destroy_node()


def test_incompatible_qos_is_counted(rig):
    from rclpy.qos import QoSProfile, ReliabilityPolicy
    best_effort = QoSProfile(depth=5, reliability=ReliabilityPolicy.BEST_EFFORT)
    rig.driver.create_publisher(String, "task_status", best_effort)   # the node wants reliable
    assert rig.spin_until(lambda: rig.node.counters.qos_incompatible > 0, 30)


def test_learned_belief_survives_a_restart_with_a_store_file(ctx, tmp_path):
    store = str(tmp_path / "beliefs.sqlite3")
    rig = Rig(ctx, namespace="/persist", store_path=store, robot_id="r1")
    try:
        assert rig.connected() and rig.show_people(TWO)
        d = rig.open_need("s1", "handover", urgency=1.0)
        rig.report("s1", d["person_id"], "helped")
        key = rig.node.store.key_for(d["person_id"])
        learned = rig.node.session.memory.records[key].belief
        assert learned == Belief(3.0, 2.0)
    finally:
        rig.close()
    rig = Rig(ctx, namespace="/persist2", store_path=store, robot_id="r1")
    try:
        # folded again from the file
        assert rig.node.session.memory.record_for(key).belief == learned
    finally:
        rig.close()


def test_diagnostics_report_store_state(ctx, tmp_path):
    rig = Rig(ctx, namespace="/diagstore", store_path=str(tmp_path / "b.sqlite3"), robot_id="r2")
    try:
        assert rig.connected() and rig.show_people(TWO)
        d = rig.open_need("q1", "handover", urgency=1.0)
        rig.report("q1", d["person_id"], "helped")

        def has_event():
            for arr in rig.diagnostics:
                vals = {v.key: v.value for s in arr.status for v in s.values}
                if vals.get("store") == "SqliteStore" and vals.get("store.events") == "1":
                    return True
            return False
        assert rig.spin_until(has_event, 30)
    finally:
        rig.close()


def test_default_store_is_a_file_under_the_ros_home(ctx, tmp_path, monkeypatch):
    # DESIGN.md section 7: SQLite by default, path under the ROS home; 'memory' opts out.
    from helpaware_node.ros.node import resolve_store_path
    monkeypatch.setenv("ROS_HOME", str(tmp_path))
    expected = tmp_path / "helpaware" / "beliefs.sqlite3"
    assert resolve_store_path("") == str(expected)
    assert resolve_store_path("memory") == ""
    assert resolve_store_path("/x/y.sqlite3") == "/x/y.sqlite3"
    rig = Rig(ctx, namespace="/defaultstore", robot_id="r3")
    try:
        assert type(rig.node.store).__name__ == "SqliteStore"
        assert expected.exists()
    finally:
        rig.close()
