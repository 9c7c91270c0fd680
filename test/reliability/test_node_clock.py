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

"""Clock faults through the running node.

Sim time (`use_sim_time`) paused, jumped forward and back on /clock. The core-level checks are in
test_clock_jumps.py; these drive the node's own bookkeeping (robot ask memory, person records,
pending asks) through the real topics.

What must hold (DESIGN.md limits; docs/RELIABILITY.md): no burst of asks, no negative
interval in any number the node publishes, every limit holds on the clock the node runs on.
"""
import math

from helpaware_node import wire
from node_harness import Rig
from rosgraph_msgs.msg import Clock
from std_msgs.msg import String

CAP_PER_HOUR = 12
PEOPLE = [{"id": f"porter-{i:02d}", "distance_m": 1.0 + 0.1 * i, "busyness": 0.0}
          for i in range(16)]


class SimClock:

    def __init__(self, rig):
        self.rig = rig
        self.pub = rig.driver.create_publisher(Clock, "/clock", 10)

    def set_to(self, t_s: float) -> None:
        msg = Clock()
        msg.clock.sec = int(t_s)
        msg.clock.nanosec = int(round((t_s - int(t_s)) * 1e9))

        def there():
            self.pub.publish(msg)
            return abs(self.rig.node.now_s() - t_s) < 1e-6
        assert self.rig.spin_until(there), f"node clock never reached {t_s}"


def _sim_rig(ctx, namespace):
    return Rig(ctx, namespace=namespace, use_sim_time=True, store_path="memory",
               max_asks_per_hour=CAP_PER_HOUR, max_asks_per_person_per_day=3,
               min_reask_interval_s=600.0, max_observation_age_s=5.0,
               pending_ask_timeout_s=30.0)


def _need_and_answer(rig, request_id):
    d = rig.open_need(request_id, "handover", urgency=1.0)
    if d["action"] == "ask":
        rig.report(request_id, d["person_id"], "helped")   # no second ask for the need
        rig.task_pub.publish(String(data=wire.task_status_document(request_id, "resolved")))
    return d


def _check_no_negative_interval(d):
    for row in d["rationale"]:
        for field in ("p", "mean", "c"):
            v = row.get(field)
            assert v is None or (math.isfinite(v) and 0.0 <= v <= 1.0), (field, row)
    for c in d["candidates"]:
        assert all(math.isfinite(t) for t in c["ask_times_s"])


def test_paused_sim_clock_gives_no_burst_of_asks(ctx):
    """40 needs at one frozen sim time with 16 people in view.

    Each person asked at most once (the re-ask interval sees a gap of 0 s) and the robot at most
    its hourly cap.
    """
    rig = _sim_rig(ctx, "/paused")
    try:
        assert rig.connected()
        clock = SimClock(rig)
        clock.set_to(20_000.0)
        assert rig.show_people(PEOPLE)
        decisions = [_need_and_answer(rig, f"p{k}") for k in range(40)]
        asked = [d["person_id"] for d in decisions if d["action"] == "ask"]
        assert len(asked) == CAP_PER_HOUR                  # the cap binds, and only the cap
        assert len(set(asked)) == len(asked)               # nobody twice at a gap of 0 s
        assert all(d["stamp_s"] == 20_000.0 for d in decisions)
        capped = [d for d in decisions if d["action"] == "continue"]
        assert all(any(r.get("excluded") == "robot_hourly_cap" for r in d["rationale"])
                   for d in capped)
        for d in decisions:
            _check_no_negative_interval(d)
    finally:
        rig.close()


def test_sim_clock_forward_excursion_and_back_keeps_the_hourly_cap(ctx):
    """12 asks in a sim hour, one need at a clock 5 days ahead, the clock back inside the hour.

    No more asks there (the node's robot ask memory keeps its newest max_asks_per_hour).
    """
    rig = _sim_rig(ctx, "/excursion")
    try:
        assert rig.connected()
        clock = SimClock(rig)
        asks = 0
        for k in range(CAP_PER_HOUR):
            clock.set_to(10_000.0 + 30.0 * k)
            assert rig.show_people(PEOPLE)
            asks += _need_and_answer(rig, f"a{k}")["action"] == "ask"
        assert asks == CAP_PER_HOUR
        clock.set_to(10_000.0 + 5 * 86_400.0)
        assert rig.show_people(PEOPLE)
        asks += _need_and_answer(rig, "ahead")["action"] == "ask"
        for k in range(6):                                 # back inside the first hour
            clock.set_to(10_400.0 + 60.0 * k)
            assert rig.show_people(PEOPLE)
            d = _need_and_answer(rig, f"b{k}")
            _check_no_negative_interval(d)
            assert d["action"] == "continue", d["why"]
        assert asks == CAP_PER_HOUR + 1
    finally:
        rig.close()


def test_sim_clock_jump_back_asks_nobody_already_asked(ctx):
    """Asks at t = 50 000 s, the clock back to 40 000 s.

    Every earlier ask is 'in the future', so the re-ask interval excludes each of those people; the
    others may still be asked.
    """
    rig = _sim_rig(ctx, "/jumpback")
    try:
        assert rig.connected()
        clock = SimClock(rig)
        clock.set_to(50_000.0)
        assert rig.show_people(PEOPLE)
        first = [_need_and_answer(rig, f"f{k}") for k in range(4)]
        asked = {d["person_id"] for d in first if d["action"] == "ask"}
        assert len(asked) == 4
        clock.set_to(40_000.0)
        assert rig.show_people(PEOPLE)
        later = [_need_and_answer(rig, f"g{k}") for k in range(4)]
        for d in later:
            _check_no_negative_interval(d)
            assert d["person_id"] not in asked
            rows = {r["person_id"]: r for r in d["rationale"]}
            assert all(rows[p].get("excluded") == "reask_interval" for p in asked)
        # the pending-ask timeout measures from the ask's own (sim) time: an ask made at
        # 40 000 s is not expired by an earlier one's bookkeeping
        assert rig.node.session.expired_asks == 0
    finally:
        rig.close()


class _JumpyWallClock:
    """System time with a step added at will (what an NTP step does to the node's clock).

    The steady clock underneath keeps counting real time.
    """

    def __init__(self, node):
        self.offset_s = 0.0
        real = node.now_s
        node.now_s = lambda: real() + self.offset_s


def test_system_time_jump_forward_keeps_the_limits_on_real_time(ctx):
    """On system time (no sim), 12 asks, then the wall clock steps 2 days ahead.

    The hourly cap and the re-ask interval still count the asks' real ages, so no burst follows.
    """
    rig = Rig(ctx, namespace="/ntpstep", store_path="memory", max_asks_per_hour=CAP_PER_HOUR,
              max_asks_per_person_per_day=3, min_reask_interval_s=600.0,
              pending_ask_timeout_s=30.0)
    try:
        assert rig.connected()
        wall = _JumpyWallClock(rig.node)
        assert rig.show_people(PEOPLE)
        first = [_need_and_answer(rig, f"s{k}") for k in range(CAP_PER_HOUR)]
        asked = {d["person_id"] for d in first if d["action"] == "ask"}
        assert len(asked) == CAP_PER_HOUR
        wall.offset_s = 2 * 86_400.0
        assert rig.show_people(PEOPLE)
        after = [_need_and_answer(rig, f"t{k}") for k in range(4)]
        for d in after:
            _check_no_negative_interval(d)
            assert d["action"] == "continue", d["why"]
            rows = {r["person_id"]: r for r in d["rationale"]}
            assert all(rows[p]["excluded"] in ("reask_interval", "robot_hourly_cap")
                       for p in asked)
        assert rig.node.session.clock_jumps_forward == 1
        # the asks kept their real age: still inside the hour, just moved into the new time
        ages = [d["stamp_s"] - t for d in after[-1:] for t in d["robot_ask_times_s"]]
        assert len(ages) == CAP_PER_HOUR and all(0.0 <= a < 600.0 for a in ages)
    finally:
        rig.close()


def test_a_need_before_the_first_clock_waits_then_is_decided_on_a_held_clock(ctx):
    """A need that arrives before any /clock is not decided on time zero.

    Once a clock reading arrives and then holds (a paused simulator), the need is decided at that
    time, and /diagnostics keeps coming while the clock stands still (the node's cadence runs on
    the steady clock, not on sim time).
    """
    from diagnostic_msgs.msg import DiagnosticArray
    rig = _sim_rig(ctx, "/firstclock")
    statuses = []
    rig.driver.create_subscription(DiagnosticArray, "/diagnostics",
                                   lambda m: statuses.append(m), 10)
    try:
        assert rig.connected()
        n = len(rig.decisions)
        rig.task_pub.publish(String(data=wire.task_status_document("early", "open", "door")))
        assert rig.spin_until(lambda: rig.node.counters.received["task_status"] > 0)
        mine = lambda: [d for d in rig.decisions[n:] if d["request_id"] == "early"]  # noqa: E731
        rig.spin_until(lambda: bool(mine()), timeout_s=1.0)
        assert not mine()                                # nothing decided on time zero
        SimClock(rig).set_to(30_000.0)                   # one reading, then the clock holds
        assert rig.spin_until(lambda: bool(mine())), "the waiting need was never decided"
        assert abs(mine()[0]["stamp_s"] - 30_000.0) < 1e-6
        seen = len(statuses)
        assert rig.spin_until(lambda: len(statuses) >= seen + 2), "diagnostics stopped"
    finally:
        rig.close()
