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

"""Hard limits over random ask sequences and random configurations (hypothesis).

DESIGN.md section 4: the limits come before scores and are never traded for value. Each
sequence is driven through the core as node and simulator drive it (candidate_from_record,
decide, note_ask with its pruning, note_outcome), with continue costs high enough that the
score would ask whenever a limit allows. The checks use an independent ledger of every ask
ever made (never pruned), counted directly from the definitions of the limits.
"""
from helpaware_node.core import (
    candidate_from_record,
    decide,
    DecisionConfig,
    HelpNeed,
    keep_recent_asks,
    note_ask,
    note_candidate,
    note_outcome,
    OutcomeEvent,
    PersonRecord,
    Result,
    SiteModel,
)
from helpaware_node.core.model import MAX_REASK_INTERVAL_S
from hypothesis import given, strategies as st

DAY_S = 86400.0
HOUR_S = 3600.0
PEOPLE = ("p0", "p1", "p2")

configs = st.builds(
    lambda interval, per_day, per_hour: DecisionConfig(
        min_reask_interval_s=interval, max_asks_per_person_per_day=per_day,
        max_asks_per_hour=per_hour, busyness_limit=1.0, max_distance_m=100.0),
    # the interval anywhere in its range, with values around a day and above drawn often
    st.one_of(st.floats(0.0, MAX_REASK_INTERVAL_S), st.floats(0.0, 2 * HOUR_S),
              st.floats(20 * HOUR_S, 4 * DAY_S), st.just(MAX_REASK_INTERVAL_S)),
    st.integers(0, 6), st.integers(0, 8))

models = st.builds(lambda h: SiteModel(ask_memory_half_life_s=h),
                   st.one_of(st.just(1800.0), st.floats(60.0, 30 * DAY_S)))

# (seconds since the previous need, which people are in view, result of an ask)
steps = st.lists(st.tuples(
    st.one_of(st.floats(0.0, 120.0), st.floats(0.0, 6 * HOUR_S), st.floats(0.0, 3 * DAY_S),
              st.floats(0.0, 40 * DAY_S)),
    st.lists(st.sampled_from(PEOPLE), min_size=1, max_size=3, unique=True),
    st.sampled_from(list(Result))), min_size=1, max_size=60)


def run(steps_, model, config):
    """Asks made, per person and for the robot, in the order they were made."""
    records = {p: PersonRecord.new(model) for p in PEOPLE}
    robot_memory: list = []
    person_asks = {p: [] for p in PEOPLE}
    robot_asks = []
    now = 1.7e9
    for k, (gap_s, in_view, result) in enumerate(steps_):
        now += gap_s
        cands = []
        for pid in in_view:
            records[pid] = note_candidate(records[pid], now)
            cands.append(candidate_from_record(pid, records[pid], now, model, distance_m=1.0,
                                               observed_at_s=now, busyness=0.0))
        need = HelpNeed(f"r{k}", "door", now, continue_cost_s=1e8)
        decision = decide(need, cands, now, robot_memory, model, config)
        if decision.action != "ask":
            continue
        pid = decision.person_id
        person_asks[pid].append(now)
        robot_asks.append(now)
        robot_memory = list(keep_recent_asks(robot_memory, now, HOUR_S,
                                             config.max_asks_per_hour)) + [now]
        load = float(decision.evaluation.ask_load[decision.person_index])
        records[pid] = note_ask(records[pid], now, model)
        records[pid] = note_outcome(records[pid], OutcomeEvent(now, result, 0.0, load,
                                                               event_id=f"r1/{k}"), model)
    return person_asks, robot_asks


def most_in_any_window(times, window_s):
    """Return the most asks inside any half-open window [t, t + window_s).

    The most asks inside any half-open window [t, t + window_s) (windows that start at an ask are
    the fullest ones).
    """
    return max((sum(1 for u in times if t <= u < t + window_s) for t in times), default=0)


@given(steps, models, configs)
def test_no_decision_breaks_a_hard_limit(steps_, model, config):
    person_asks, robot_asks = run(steps_, model, config)
    for times in person_asks.values():
        # times only move forward here, so "any earlier ask" is the previous one
        assert all(later - earlier >= config.min_reask_interval_s
                   for earlier, later in zip(times, times[1:]))
        assert most_in_any_window(times, DAY_S) <= config.max_asks_per_person_per_day
    assert most_in_any_window(robot_asks, HOUR_S) <= config.max_asks_per_hour


def test_the_sequences_reach_the_limits():
    """The property above is not empty.

    With these strategies asks happen and each limit binds (one fixed sequence per limit).
    """
    model = SiteModel()
    view = list(PEOPLE[:1])
    # one person, a need every 25 h: only a > 24 h interval can stop the second ask
    person_asks, _ = run([(25 * HOUR_S, view, Result.DECLINED)] * 3, model,
                         DecisionConfig(min_reask_interval_s=2 * DAY_S))
    assert person_asks["p0"] == [1.7e9 + 25 * HOUR_S, 1.7e9 + 75 * HOUR_S]
    person_asks, _ = run([(60.0, view, Result.HELPED)] * 10, model,
                         DecisionConfig(min_reask_interval_s=0.0, max_asks_per_person_per_day=4))
    assert len(person_asks["p0"]) == 4
    _, robot_asks = run([(60.0, list(PEOPLE), Result.HELPED)] * 10, model,
                        DecisionConfig(min_reask_interval_s=0.0, max_asks_per_hour=5))
    assert len(robot_asks) == 5


@given(st.lists(st.floats(-1e7, 1e7), min_size=1, max_size=40), models)
def test_note_ask_never_drops_what_a_limit_needs(times, model):
    """Asks noted at any times, in any order (clock jumps, asks noted late).

    The record keeps the latest-stamped ask, every ask within the history horizon of the last one
    noted, and the one before the latest while within MAX_REASK_INTERVAL_S (so taking back the
    latest, as could_not_ask does, still leaves the right one); never more than MAX_ASKS_CAP.
    """
    from helpaware_node.core.model import MAX_ASKS_CAP
    from helpaware_node.core.person import ask_history_horizon_s
    record = PersonRecord.new(model)
    for t in times:
        record = note_ask(record, t, model)
    kept = list(record.ask_times_s)
    now = times[-1]
    assert len(kept) <= MAX_ASKS_CAP
    assert max(kept) == max(times)
    horizon = ask_history_horizon_s(model)
    # every ask noted at or after the last pruning that is still recent is there (ledger:
    # asks noted before an earlier prune may be gone only if they were old at that prune)
    for t in times:
        if all(later - t < horizon for later in times[times.index(t):]):
            assert t in kept
    ranked = sorted(times, reverse=True)
    if len(ranked) > 1 and now - ranked[1] < MAX_REASK_INTERVAL_S and ranked[0] == now:
        rest = list(kept)
        rest.remove(now)
        assert max(rest) == ranked[1]
