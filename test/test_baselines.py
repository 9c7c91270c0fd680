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

"""Comparison policies: each picks only eligible people and does what its name says."""
from __future__ import annotations

from helpaware_node.core import Belief, Candidate, decide, DecisionConfig, HelpNeed, SiteModel
from helpaware_node.core.baselines import (
    BusynessThreshold,
    choose_nearest,
    choose_never,
    make_chooser,
    Oracle,
    POLICY_NAMES,
    ThompsonSampling,
    WillingnessOnly,
)
from helpaware_node.core.policy import evaluate
import numpy as np
import pytest

MODEL, CONFIG = SiteModel(), DecisionConfig()
NOW = 5000.0
NEED = HelpNeed("r1", "door", NOW, continue_cost_s=150.0, help_time_s=20.0)


def cand(pid, dist, busy, a=2.0, b=2.0, activity="", asks=()):
    return Candidate(pid, dist, NOW, Belief(a, b), busy, activity, tuple(asks), 3, NOW - 3600.0)


PEOPLE = [cand("near_patient", 0.5, 0.2, activity="with_patient"),   # excluded: protected
          cand("near_busy", 1.0, 0.6, a=9.0, b=1.0),                 # willing but busy
          cand("mid_free", 2.0, 0.1, a=2.0, b=6.0),                  # free, not very willing
          cand("far_free", 4.0, 0.0, a=6.0, b=2.0),                  # free and willing
          cand("too_far", 20.0, 0.0, a=50.0, b=1.0)]                 # excluded: distance


def ev():
    return evaluate(NEED, PEOPLE, NOW, [], MODEL, CONFIG)


def test_never_continues():
    d = decide(NEED, PEOPLE, NOW, [], MODEL, CONFIG, choose_never, "never")
    assert d.action == "continue" and d.why == "no_positive_score"


def test_nearest_skips_excluded_people():
    e = ev()
    assert e.exclusions[0] is not None and e.exclusions[4] is not None
    assert e.candidates[choose_nearest(e)].person_id == "near_busy"


def test_busyness_threshold_is_context_only():
    e = ev()
    assert e.candidates[BusynessThreshold(0.3)(e)].person_id == "mid_free"
    assert BusynessThreshold(0.0)(e) is None


def test_willingness_only_ignores_context():
    e = ev()
    i = WillingnessOnly(CONFIG)(e)
    assert e.candidates[i].person_id == "near_busy"  # mean 0.9 wins although busy
    # by hand: A = m (C - t_help) - (1 - m) t_ask - weight, with m = 0.9
    assert 0.9 * 130 - 0.1 * 10 - 6 > 0


def test_thompson_is_seeded_and_uses_the_same_beliefs():
    e = ev()
    picks1 = [ThompsonSampling(CONFIG, 7)(e) for _ in range(1)]
    t1, t2 = ThompsonSampling(CONFIG, 7), ThompsonSampling(CONFIG, 7)
    assert [t1(e) for _ in range(20)] == [t2(e) for _ in range(20)]
    # the draw it makes is Beta(a, b) from numpy with that seed (outside check: numpy's beta)
    w = np.random.default_rng(7).beta(e.a, e.b)
    adv = (e.c * w) * 130 - (1 - e.c * w) * 10 - e.interruption_s
    adv[[0, 4]] = -np.inf
    assert picks1[0] == int(np.argmax(adv))


def test_oracle_asks_the_best_positive_true_score_among_the_eligible():
    e = ev()
    # the best true score belongs to an excluded person (too far): never picked
    truth = np.array([90.0, -5.0, 3.0, 40.0, 100.0])
    i = Oracle(lambda _: truth)(e)
    assert e.candidates[i].person_id == "far_free"
    assert Oracle(lambda _: np.full(5, -1.0))(e) is None   # nothing worth it: continue
    assert Oracle(lambda _: np.zeros(5))(e) is None        # a zero score: continue (ties)


def test_no_policy_ever_picks_an_excluded_person():
    rng = np.random.default_rng(3)
    for trial in range(60):
        people = [cand(f"p{k}", float(rng.uniform(0, 12)), float(rng.uniform(0, 1)),
                       float(rng.uniform(0.5, 10)), float(rng.uniform(0.5, 10)),
                       "with_patient" if rng.random() < 0.2 else "",
                       tuple(NOW - rng.uniform(0, 4000, size=rng.integers(0, 4))))
                  for k in range(6)]
        e = evaluate(NEED, people, NOW, [], MODEL, CONFIG)
        for name in POLICY_NAMES:
            chooser = make_chooser(name, CONFIG, seed=trial,
                                   true_score=lambda ev_: rng.uniform(-50, 50,
                                                                      len(ev_.candidates)))
            i = chooser(e)
            assert i is None or e.exclusions[i] is None, name


def test_unknown_policy_is_named():
    with pytest.raises(ValueError, match="policy: 'best'"):
        make_chooser("best", CONFIG)
