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

"""Property tests (hypothesis) for the invariants of DESIGN.md sections 3 and 4."""
import math

from helpaware_node.core import (
    Belief,
    Candidate,
    decide,
    DecisionConfig,
    evaluate,
    fold_events,
    HelpNeed,
    information_value,
    OutcomeEvent,
    Result,
    SiteModel,
)
from helpaware_node.core.belief import declined_moments, update_declined, update_helped
from helpaware_node.core.person import keep_recent_asks
from helpaware_node.core.policy import Exclusion
from hypothesis import given, strategies as st
import numpy as np
from scipy import integrate, stats

ab = st.floats(min_value=0.05, max_value=500.0, allow_nan=False)
cs = st.floats(min_value=0.0, max_value=1.0, allow_nan=False)


@given(ab, ab, cs)
def test_updates_keep_parameters_positive_and_finite(a, b, c):
    for post in (update_helped(Belief(a, b)), update_declined(Belief(a, b), c)):
        assert post.a > 0 and post.b > 0
        assert math.isfinite(post.a) and math.isfinite(post.b)


@given(ab, ab, cs)
def test_helped_never_lowers_and_declined_never_raises_the_mean(a, b, c):
    m = Belief(a, b).mean
    assert update_helped(Belief(a, b)).mean >= m
    assert update_declined(Belief(a, b), c).mean <= m + 1e-12


@given(st.floats(0.2, 60.0), st.floats(0.2, 60.0), cs)
def test_matched_mean_equals_exact_posterior_mean(a, b, c):
    # Reference: scipy.integrate.quad of the exact posterior (1 - c w) Beta(w; a, b).
    dens = lambda w: (1 - c * w) * stats.beta.pdf(w, a, b)  # noqa: E731
    z = integrate.quad(dens, 0, 1, limit=200)[0]
    exact = integrate.quad(lambda w: w * dens(w), 0, 1, limit=200)[0] / z
    assert abs(update_declined(Belief(a, b), c).mean - exact) < 1e-6


@given(ab, ab, cs)
def test_posterior_mean_is_a_martingale(a, b, c):
    # Exact algebra: p E[w | helped] + (1 - p) E[w | declined] = E[w], p = c a/(a+b).
    m = a / (a + b)
    p = c * m
    md, _ = declined_moments(a, b, c)
    assert abs(p * (a + 1) / (a + b + 1) + (1 - p) * float(md) - m) < 1e-12


@given(ab, ab, cs, st.floats(0.0, 1.0), st.floats(0.0, 600.0), st.floats(0.0, 60.0))
def test_information_value_is_never_negative(a, b, c, xbar, cbar_cost, w):
    config = DecisionConfig(typical_busyness=xbar, typical_continue_cost_s=cbar_cost,
                            interruption_weight_s=w)
    voi = information_value(np.array([a]), np.array([b]), np.array([c]), SiteModel(), config, 20.0)
    assert voi[0] >= 0.0


def _unclipped_voi(a, b, c, model, config):
    from helpaware_node.core.policy import typical_gain
    m = a / (a + b)
    p = c * m
    md, _ = declined_moments(a, b, c)
    u = lambda x: float(typical_gain(x, model, config, 20.0))  # noqa: E731
    return p * u((a + 1) / (a + b + 1)) + (1 - p) * u(float(md)) - u(m)


@given(ab, ab, cs)
def test_information_value_before_clipping_is_not_negative(a, b, c):
    # Jensen: U convex and the mean a martingale; allow only rounding noise.
    assert _unclipped_voi(a, b, c, SiteModel(), DecisionConfig()) > -1e-9


events = st.lists(st.tuples(st.floats(0.0, 1e5), st.sampled_from(list(Result)),
                            st.floats(0.0, 1.0), st.floats(0.0, 3.0)), max_size=12)


@given(events, st.randoms())
def test_fold_does_not_depend_on_arrival_order(rows, rnd):
    model = SiteModel(evidence_half_life_s=7200.0)
    evs = [OutcomeEvent(t, r, x, f, event_id=f"robot/{i:04d}") for i, (t, r, x,
                                                                       f) in enumerate(rows)]
    shuffled = list(evs)
    rnd.shuffle(shuffled)
    assert fold_events(evs, model) == fold_events(shuffled, model)


person = st.builds(
    lambda pid, a, b, x, d, asks, opted: Candidate(
        person_id=pid, distance_m=d, observed_at_s=1000.0, belief=Belief(a, b), busyness=x,
        ask_times_s=tuple(asks), opted_out=opted),
    st.text("abcdefgh", min_size=1, max_size=3), ab, ab, st.floats(0.0, 1.0),
    st.floats(0.0, 12.0), st.lists(st.floats(-90000.0, 1000.0), max_size=5), st.booleans())


@given(st.lists(person, max_size=8, unique_by=lambda c: c.person_id),
       st.floats(0.0, 5000.0), st.integers(0, 5), st.floats(0.0, 3600.0))
def test_limits_are_never_traded_for_value(people, cost, cap, interval):
    config = DecisionConfig(max_asks_per_person_per_day=cap, min_reask_interval_s=interval)
    need = HelpNeed("r", "door", 1000.0, continue_cost_s=cost)
    d = decide(need, people, 1000.0, [], SiteModel(), config)
    if d.action == "ask":
        chosen = people[d.person_index]
        assert not chosen.opted_out
        assert all(1000.0 - t >= interval for t in chosen.ask_times_s)   # every ask, any age
        assert sum(1 for t in chosen.ask_times_s if 1000.0 - t < 86400.0) < cap
        assert d.evaluation.score_s[d.person_index] > 0
    ev = evaluate(need, people, 1000.0, [], SiteModel(), config)
    for cand_, excl in zip(people, ev.exclusions):
        if cand_.opted_out:
            assert excl is Exclusion.OPTED_OUT


@given(st.lists(st.floats(-1e7, 1e7), max_size=40), st.floats(-1e7, 1e7),
       st.floats(1.0, 1e6), st.integers(0, 50))
def test_kept_asks_hold_the_recent_ones_and_the_newest_cap(times, now, horizon, keep_last):
    """DESIGN.md limits under clock jumps.

    Pruning keeps every ask inside the horizon and the newest `keep_last` whatever their time, in
    order, and drops only asks past the horizon.
    """
    kept = list(keep_recent_asks(times, now, horizon, keep_last))
    it = iter(times)
    assert all(any(t == u for u in it) for t in kept)          # an order-keeping subsequence
    tail = min(keep_last, len(times))
    assert kept[len(kept) - tail:] == times[len(times) - tail:]
    dropped = list(times)
    for t in kept:
        dropped.remove(t)
    assert all(now - t >= horizon for t in dropped)
    assert len(kept) == len(times) - len(dropped)
