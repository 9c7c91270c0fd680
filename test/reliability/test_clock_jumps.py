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

"""Clock jumps through the core: backwards, forwards, and a paused (sim) clock.

What the core does (helpaware_node/core/policy.py `_limits`, `evaluate`):
- an ask recorded at a time later than now_s (the clock went back) counts as recent: now_s - t
  is negative, which is below the re-ask interval, a day and an hour, so the person stays
  excluded (reask_interval) until the clock passes t + min_reask_interval_s, and the robot's
  hourly count keeps it;
- the ask load of such an ask is 2^(-max(now_s - t, 0)/h) = 1, never above 1 per ask, never
  negative; forgetting treats a negative interval as zero (belief.forgetting_factor);
- the look-ahead's time seen is max(now_s - first_seen_s, 0).
So a backward jump cannot open a burst of asks; a forward jump only ages asks as real time would.
"""
from dataclasses import replace

from helpaware_node.core.belief import Belief
from helpaware_node.core.model import DecisionConfig, SiteModel
from helpaware_node.core.person import keep_recent_asks, note_ask, PersonRecord
from helpaware_node.core.policy import (
    Candidate,
    candidate_from_record,
    decide,
    evaluate,
    Exclusion,
    HelpNeed,
)
import numpy as np
import pytest
from reliability_sequence import limit_breaches, retimed, run_sequence, scaled

MODEL = SiteModel(evidence_half_life_s=3600.0)
CONFIG = DecisionConfig()


def _need(t):
    return HelpNeed(request_id="r", kind="door", opened_at_s=t)


def _cand(now_s, ask_times_s=(), first_seen_s=None, belief=None):
    return Candidate(person_id="nurse_a", distance_m=1.0, observed_at_s=now_s,
                     belief=belief or Belief(8.0, 1.0), busyness=0.0,
                     ask_times_s=tuple(ask_times_s), first_seen_s=first_seen_s)


def test_backward_jump_keeps_the_reask_interval():
    asked_at = 10_000.0
    for now in (asked_at - 1.0, asked_at - 3600.0, asked_at - 86_400.0 * 3,
                asked_at + CONFIG.min_reask_interval_s - 1.0):
        ev = evaluate(_need(now), [_cand(now, [asked_at])], now, [asked_at], MODEL, CONFIG)
        assert ev.exclusions[0] is Exclusion.REASK_INTERVAL, now
        # exact: one ask, 'in the future' or just now, weighs exactly 2^0 = 1
        assert 0.0 < ev.ask_load[0] <= 1.0
        if now <= asked_at:
            assert ev.ask_load[0] == 1.0
    later = asked_at + CONFIG.min_reask_interval_s
    ev = evaluate(_need(later), [_cand(later, [asked_at])], later, [asked_at], MODEL, CONFIG)
    assert ev.exclusions[0] is None


def test_backward_jump_keeps_the_robot_hourly_cap():
    future_asks = [50_000.0 + 60.0 * i for i in range(CONFIG.max_asks_per_hour)]
    now = 1_000.0   # the clock went back more than half a day
    d = decide(_need(now), [_cand(now)], now, future_asks, MODEL, CONFIG)
    assert d.action == "continue"
    assert d.evaluation.exclusions[0] is Exclusion.ROBOT_HOURLY_CAP


def test_future_first_seen_and_evidence_give_finite_scores():
    now = 0.0
    record = PersonRecord(belief=Belief(5.0, 2.0), belief_time_s=1e9, first_seen_s=1e9)
    from helpaware_node.core.person import belief_at
    b = belief_at(record, now, MODEL)
    assert (b.a, b.b) == (5.0, 2.0)   # negative interval: no forgetting (factor 1), not growth
    ev = evaluate(_need(now), [_cand(now, first_seen_s=1e9, belief=b)], now, [], MODEL, CONFIG)
    for name in ("ask_load", "c", "p", "advantage_s", "voi_s", "future_requests", "score_s"):
        arr = getattr(ev, name)
        assert np.all(np.isfinite(arr)), name
    assert ev.future_requests[0] > 0.0 and ev.voi_s[0] >= 0.0


def test_note_ask_after_backward_jump_keeps_the_future_ask():
    record = note_ask(PersonRecord.new(MODEL), 10_000.0, MODEL)
    record = note_ask(record, 100.0, MODEL)
    assert record.ask_times_s == (10_000.0, 100.0)


def _jumpy_times(rng, n, forward_jumps):
    """Mostly forward steps of about a minute, with jumps back (and forward) and pauses."""
    steps = rng.exponential(60.0, size=n)
    kind = rng.random(n)
    # without forward jumps, backward ones stay small, or the clock would only ever fall back
    max_back_s = 2 * 86_400.0 if forward_jumps else 7_200.0
    back = kind < (0.02 if forward_jumps else 0.01)
    steps[back] = -rng.uniform(60.0, max_back_s, size=int(np.sum(back)))
    jump_fwd = (kind >= 0.02) & (kind < 0.03) & forward_jumps
    steps[jump_fwd] = rng.uniform(3600.0, 5 * 86_400.0, size=int(np.sum(jump_fwd)))
    steps[(kind >= 0.03) & (kind < 0.15)] = 0.0           # paused clock: the same now_s again
    return 1e6 + np.cumsum(steps), 1e6 + np.cumsum(np.maximum(steps, 0.0))


def _finite_checker():
    bad = {"nonfinite": 0, "negative_load": 0}

    def check(decision, now_s):
        ev = decision.evaluation
        for arr in (ev.ask_load, ev.c, ev.p, ev.advantage_s, ev.voi_s, ev.future_requests,
                    ev.score_s):
            bad["nonfinite"] += int(np.sum(~np.isfinite(arr)))
        bad["negative_load"] += int(np.sum(ev.ask_load < 0.0))
    return bad, check


@pytest.mark.parametrize("seed", [21, 22])
def test_forward_and_backward_jumps_give_finite_numbers(seed):
    rng = np.random.default_rng(seed)
    n = scaled(3_000, 20_000)
    times, _ = _jumpy_times(rng, n, forward_jumps=True)
    bad, check = _finite_checker()
    ledger = run_sequence(rng, n, times, MODEL, CONFIG, on_decision=check)
    assert bad == {"nonfinite": 0, "negative_load": 0}
    assert ledger.asks_of_opted_out == 0 and len(ledger.robot_asks_s) > 20


@pytest.mark.parametrize("seed", [11, 12])
def test_backward_jumps_and_pauses_hold_every_limit(seed):
    rng = np.random.default_rng(seed)
    n = scaled(4_000, 25_000)
    times, real_times = _jumpy_times(rng, n, forward_jumps=False)
    assert np.any(np.diff(times) < 0) and np.any(np.diff(times) == 0)
    bad, check = _finite_checker()
    ledger = run_sequence(rng, n, times, MODEL, CONFIG, on_decision=check)
    assert bad == {"nonfinite": 0, "negative_load": 0}
    assert ledger.asks_of_opted_out == 0
    # judged on real elapsed time (the backward jumps are clock errors, not time passing):
    # no burst of asks once the clock has jumped back
    assert limit_breaches(retimed(ledger, real_times), CONFIG) == {
        "reask_interval": 0, "person_daily_cap": 0, "robot_hourly_cap": 0}
    assert len(ledger.robot_asks_s) > 20


def test_paused_clock_gives_at_most_one_ask_per_person():
    """Sim time paused: the same now_s for many needs.

    Each person asked once, the robot at most max_asks_per_hour times.
    """
    rng = np.random.default_rng(5)
    n = 500
    ledger = run_sequence(rng, n, np.full(n, 7_200.0), MODEL, CONFIG, n_people=40,
                          opt_out_share=0.0)
    assert all(len(v) == 1 for v in ledger.person_asks_s.values())
    assert len(ledger.robot_asks_s) == CONFIG.max_asks_per_hour


def test_forward_excursion_then_back_keeps_the_hourly_cap():
    """Regression (found by this suite).

    12 asks in an hour, one need at a clock 5 days ahead, the clock comes back. Pruning by `now - t
    < 3600` alone dropped the 12 real asks and allowed 12 more inside the same real hour (24). The
    node and the simulator prune with core `keep_recent_asks`, which always keeps the newest
    `max_asks_per_hour`.
    """
    config = DecisionConfig(max_asks_per_person_per_day=100, min_reask_interval_s=0.0)
    robot = []
    asks = 0
    for i, now in enumerate([1000.0 + 60 * k for k in range(12)] + [1000.0 + 5 * 86_400.0]
                            + [1800.0 + 60 * k for k in range(12)]):
        cand = Candidate(person_id=f"p{i}", distance_m=1.0, observed_at_s=now,
                         belief=Belief(8.0, 1.0), busyness=0.0)
        d = decide(_need(now), [cand], now, robot, MODEL, config)
        if d.action == "ask":
            asks += 1
            robot = list(keep_recent_asks(robot, now, 3600.0, config.max_asks_per_hour)) + [now]
    # 12 in the first hour, 1 in the excursion, none more in the first hour after return
    assert asks == 13


def test_forward_excursion_then_back_keeps_the_daily_cap():
    """One person's memory (`note_ask`, horizon a day) prunes by time alone, and that is safe.

    3 asks, the third at a clock 5 days ahead, back: the excursion ask counts as recent until the
    clock catches up, so the person is not asked again on the real day.
    """
    config = DecisionConfig(max_asks_per_person_per_day=3, min_reask_interval_s=0.0,
                            max_asks_per_hour=1000)
    rec = replace(PersonRecord.new(MODEL), belief=Belief(8.0, 1.0))
    asks = 0
    for now in [1000.0, 1100.0, 1000.0 + 5 * 86_400.0, 1200.0, 1300.0, 1400.0]:
        cand = candidate_from_record("p", rec, now, MODEL, 1.0, now, busyness=0.0)
        d = decide(_need(now), [cand], now, [], MODEL, config)
        if d.action == "ask":
            asks += 1
            rec = note_ask(rec, now, MODEL)
    assert asks == 3   # two real, one in the excursion, none after the return
