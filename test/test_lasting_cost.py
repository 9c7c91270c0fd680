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

"""The lasting cost of an ask (core/lasting.py): the closed form against numerical integration.

Outside checks: scipy.integrate.quad of the defining integral
    r * int_0^H e^(-s/tau) [U(f u(s)) - U((f + 1) u(s))] ds,  u(s) = 2^(-s/h),
with U written out here from its definition, and scipy.special's lower incomplete gamma
function for the identity D(rho, x) = Gamma(rho + 1) x^-rho P(rho, x).
"""
from __future__ import annotations

import math

from helpaware_node.core import Belief, Candidate, DecisionConfig, HelpNeed, SiteModel
from helpaware_node.core.lasting import decay_mean, lasting_cost
from helpaware_node.core.policy import (
    encounter_rate_per_s,
    evaluate,
    future_ask_rate_per_s,
    typical_terms,
)
from hypothesis import given, settings, strategies as st
import numpy as np
import pytest
from scipy import integrate, special


def typical_u(load, alpha, beta, gamma, k):
    return max(0.0, alpha * math.exp(-k * load) - beta - gamma * load)


def kinks_s(alpha, beta, gamma, k, f, h, horizon):
    """Where f u(s) or (f + 1) u(s) crosses the zero of U (the integrand's kinks).

    Found with scipy.optimize.brentq, independently of the module's Lambert-W root.
    """
    from scipy.optimize import brentq

    def g(x):
        return alpha * math.exp(-k * x) - beta - gamma * x
    if not (g(0.0) > 0.0 and g(f + 1.0) < 0.0):
        return []
    root = brentq(g, 0.0, f + 1.0, xtol=1e-300, rtol=1e-15)
    # a root below xtol comes back as 0 (alpha subnormal): its kink holds an integrand of
    # that size, far below the tolerance, so quad needs no split there
    return [s for s in (h * math.log2(load / root) for load in (f, f + 1.0) if load > root > 0)
            if 0.0 < s < horizon]


def by_quadrature(rate, alpha, beta, gamma, k, f, h, tau, horizon):
    """Return the defining integral, split at h/8, h/4, h/2, ... so quad sees the fast decay.

    At the integrand's kinks.
    """
    def drop(s):
        u = 2.0 ** (-s / h)
        return math.exp(-s / tau) * (typical_u(f * u, alpha, beta, gamma, k)
                                     - typical_u((f + 1.0) * u, alpha, beta, gamma, k))
    edges, e = [0.0], h / 8.0
    while e < horizon:
        edges.append(e)
        e *= 2.0
    edges = sorted(set(edges + kinks_s(alpha, beta, gamma, k, f, h, horizon))) + [horizon]
    return rate * sum(integrate.quad(drop, a, b, limit=200, epsabs=1e-12, epsrel=1e-10)[0]
                      for a, b in zip(edges, edges[1:]))


@pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")
@settings(max_examples=300, deadline=None)
@given(alpha=st.floats(0.0, 200.0), beta=st.floats(0.0, 80.0),
       gamma=st.one_of(st.just(0.0), st.floats(0.0, 40.0), st.floats(1e-300, 1e-6)),
       k=st.one_of(st.just(0.0), st.floats(0.0, 8.0), st.floats(8.0, 50.0)),
       f=st.one_of(st.just(0.0), st.floats(0.0, 6.0)),
       log_h=st.floats(1.0, 6.0), log_tau=st.floats(2.0, 6.0), log_horizon=st.floats(1.0, 6.3),
       rate=st.floats(1e-6, 1e-3))
def test_closed_form_equals_the_integral(alpha, beta, gamma, k, f, log_h, log_tau,
                                         log_horizon, rate):
    h, tau, horizon = 10.0 ** log_h, 10.0 ** log_tau, 10.0 ** log_horizon
    got = float(lasting_cost(rate, alpha, beta, gamma, k, f, h, tau, horizon))
    want = by_quadrature(rate, alpha, beta, gamma, k, f, h, tau, horizon)
    # absolute tolerance on the scale of the largest possible value, rate * alpha * tau
    assert got == pytest.approx(want, rel=1e-7, abs=1e-8 * rate * (alpha + 1.0) * tau)
    assert got >= 0.0


@pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")
@pytest.mark.parametrize("k", [5e-324, 1e-310, 1e-200, 1e-12, 1e-6])
@pytest.mark.parametrize("beta, f", [(0.0, 0.0), (0.5, 1.0), (1.9, 3.0)])
def test_a_load_effect_near_zero_gives_the_integral(k, beta, f):
    """k_load down to the smallest subnormal: the root is that of k = 0, not digits lost.

    Found by the hypothesis test above (k_load 5e-324, alpha 2, gamma 3 gave 0.0207 against
    0.0180 by quadrature): Lambert's W of a subnormal argument divided by a subnormal k.
    """
    rate, alpha, gamma, h, tau, horizon = 1e-4, 2.0, 3.0, 1000.0, 3600.0, 28800.0
    got = float(lasting_cost(rate, alpha, beta, gamma, k, f, h, tau, horizon))
    want = by_quadrature(rate, alpha, beta, gamma, k, f, h, tau, horizon)
    assert got == pytest.approx(want, rel=1e-7, abs=1e-8 * rate * (alpha + 1.0) * tau)


@pytest.mark.parametrize("f", [0.0, 0.4, 2.5])
@pytest.mark.parametrize("horizon", [600.0, 28800.0, 3e5])
def test_linear_drop_exact_form(f, horizon):
    """k_load = 0 and U positive up to load f + 1.

    The drop is gamma u(s), so by exact algebra LC = r gamma int_0^H e^(-s/tau) 2^(-s/h) ds = r
    gamma (1 - e^(-kappa H)) / kappa, kappa = 1/tau + ln 2 / h (an exponential integrated: no
    numerics).
    """
    r, alpha, beta, gamma, h, tau = 2e-4, 90.0, 20.0, 6.0, 5400.0, 14400.0
    assert alpha - beta - gamma * (f + 1.0) > 0.0
    kappa = 1.0 / tau + math.log(2.0) / h
    want = r * gamma * -math.expm1(-kappa * horizon) / kappa
    got = float(lasting_cost(r, alpha, beta, gamma, 0.0, f, h, tau, horizon))
    assert got == pytest.approx(want, rel=1e-12)


@pytest.mark.parametrize("k,f", [(0.3, 0.0), (1.0, 0.7), (1.5, 0.8)])
def test_exponential_drop_exact_form_when_half_life_is_tau_ln2(k, f):
    """Check gamma = 0 and alpha e^(-k (f+1)) > beta (U positive throughout).

    h = tau ln 2 so that u(s) = e^(-s/tau). With v = e^(-s/tau), ds = -tau dv / v: int_0^H
    e^(-s/tau) e^(-c u(s)) ds = tau int_{v_H}^1 e^(-c v) dv = tau (e^(-c v_H) - e^(-c)) / c, so LC
    = r alpha tau [E(k f) - E(k (f + 1))], E(c) that integral over tau (E(0) = 1 - v_H): exact
    algebra, no numerics.
    """
    r, alpha, beta, tau, horizon = 3e-4, 120.0, 5.0, 14400.0, 28800.0
    h = tau * math.log(2.0)
    assert alpha * math.exp(-k * (f + 1.0)) > beta
    v_h = math.exp(-horizon / tau)

    def e_int(c):
        return 1.0 - v_h if c == 0.0 else (math.exp(-c * v_h) - math.exp(-c)) / c
    want = r * alpha * tau * (e_int(k * f) - e_int(k * (f + 1.0)))
    got = float(lasting_cost(r, alpha, beta, 0.0, k, f, h, tau, horizon))
    assert got == pytest.approx(want, rel=1e-10)


@pytest.mark.parametrize("rho", [1e-9, 1e-3, 0.2, 1.0, 7.5, 300.0, 1e6, 1e12])
@pytest.mark.parametrize("x", [0.0, 1e-9, 0.3, 5.0, 60.0, 699.0, 701.0, 5e4])
def test_decay_mean_is_the_incomplete_gamma_ratio(rho, x):
    """D(rho, x) = rho int_0^1 t^(rho-1) e^(-x t) dt.

    By quad (as int_0^1 e^(-x v^(1/rho)) dv, the substitution v = t^rho) and, where it is finite,
    Gamma(rho+1) x^-rho P(rho, x).
    """
    got = float(decay_mean(rho, x))
    assert 0.0 <= got <= 1.0
    pieces = [0.0, 1e-12, 1e-9, 1e-6, 1e-3, 0.1, 0.9, 1 - 1e-3, 1 - 1e-6, 1 - 1e-9, 1 - 1e-12,
              1.0]
    want = sum(integrate.quad(lambda v: math.exp(-x * v ** (1.0 / rho)), a, b,
                              epsabs=1e-15, epsrel=1e-12, limit=200)[0]
               for a, b in zip(pieces, pieces[1:]))
    assert got == pytest.approx(want, rel=1e-8, abs=1e-14)
    if 0.0 < x and rho < 150.0:
        gamma_form = special.gamma(rho + 1.0) * x ** (-rho) * special.gammainc(rho, x)
        assert got == pytest.approx(gamma_form, rel=1e-9, abs=1e-300)


@pytest.mark.parametrize("alpha,beta,gamma,k", [
    (44.0, 21.4, 12.0, 0.7), (1e6, 1e-3, 1e-9, 50.0), (50.0, 20.0, 0.0, 0.7),
    (50.0, 20.0, 5.0, 0.0), (200.0, 199.0, 1e-8, 1e-3), (3.0, 1.0, 3.8e-229, 2.0),
    (1e9, 0.0, 1e-300, 1.0), (1e9, 1e-300, 1e-300, 1.0)])
def test_the_zero_of_the_typical_advantage(alpha, beta, gamma, k):
    """L* against scipy.optimize.brentq on alpha e^(-k L) - beta.

    gamma L (bracket [0, 1e4] or, for a root beyond double range near alpha e^(-kL) = gamma L, its
    log form).
    """
    from helpaware_node.core.lasting import _root
    from scipy.optimize import brentq
    got = float(_root(np.array([alpha]), np.array([beta]), np.array([gamma]), k)[0])
    if beta == 0.0 or beta < 1e-200:
        # log alpha - k L = log(beta + gamma L): solve in logs (gamma L beyond double range)
        want = brentq(lambda x: math.log(alpha) - k * x - math.log(beta + gamma * x), 1e-9,
                      1e6, xtol=1e-14)
    else:
        want = brentq(lambda x: alpha * math.exp(-k * x) - beta - gamma * x, 0.0, 1e4,
                      xtol=1e-15)
    assert got == pytest.approx(want, rel=1e-12, abs=1e-12)


def test_nothing_is_lost_when_nothing_is_there_to_lose():
    args = {"gamma": 12.0, "k_load": 0.7, "half_life_s": 1800.0, "discount_s": 14400.0}
    # no look-ahead, no re-encounters, or a person never worth asking at a typical request
    assert lasting_cost(1e-4, 50.0, 20.0, load=0.0, horizon_s=0.0, **args) == 0.0
    assert lasting_cost(0.0, 50.0, 20.0, load=0.0, horizon_s=28800.0, **args) == 0.0
    assert lasting_cost(1e-4, 20.0, 20.0, load=0.0, horizon_s=28800.0, **args) == 0.0
    # a person whose present load already leaves no advantage for the whole horizon:
    # alpha e^(-k f u) - beta - gamma f u < 0 at u = 2^(-H/h) = 1/4 with f = 8
    assert 50.0 * math.exp(-0.7 * 2.0) - 20.0 - 12.0 * 2.0 < 0.0
    assert lasting_cost(1e-4, 50.0, 20.0, load=8.0, horizon_s=3600.0, **args) == 0.0


def test_a_longer_ask_memory_costs_more_for_a_fresh_person():
    """With no present load the drop U(0).

    U(u) grows with u, and u(s) = 2^(-s/h) grows with h at every s, so the integral does too.
    """
    costs = [float(lasting_cost(1e-4, 50.0, 20.0, 12.0, 0.7, 0.0, h, 14400.0, 28800.0))
             for h in (60.0, 1800.0, 3600.0, 86400.0)]
    assert costs == sorted(costs) and costs[0] < costs[-1]


def test_the_score_subtracts_the_lasting_cost_with_the_rate_of_n():
    """Q = A + N VOI - LC, LC from the same rate as N and the typical request of U."""
    model, config = SiteModel(), DecisionConfig()
    now = 50_000.0
    need = HelpNeed("r", "door", now, continue_cost_s=150.0, help_time_s=20.0)
    cands = [Candidate("regular", 2.0, now, Belief(6.0, 2.0), 0.2, "", (now - 4000.0,), 12,
                       now - 3 * 86400.0),
             Candidate("new", 3.0, now, Belief(2.0, 2.0), 0.1)]
    ev = evaluate(need, cands, now, [], model, config)
    rate = future_ask_rate_per_s(np.array([12.0, 0.0]), np.array([now - 3 * 86400.0, now]), now,
                                 config)
    assert rate.tolist() == encounter_rate_per_s(np.array([12.0, 0.0]), np.array(
        [now - 3 * 86400.0, now]), now, config).tolist()      # far below the hourly cap here
    alpha, beta, gamma = typical_terms(ev.mean, model, config, 20.0)
    for i in range(2):
        want = by_quadrature(rate[i], alpha[i], beta, gamma, model.k_load, ev.ask_load[i],
                             model.ask_memory_half_life_s, config.future_discount_time_s,
                             config.lookahead_horizon_s)
        assert ev.lasting_cost_s[i] == pytest.approx(want, rel=1e-7)
        assert ev.score_s[i] == pytest.approx(ev.advantage_s[i]
                                              + ev.future_requests[i] * ev.voi_s[i]
                                              - ev.lasting_cost_s[i], rel=1e-12, abs=1e-12)
    assert ev.lasting_cost_s[0] > ev.lasting_cost_s[1] > 0.0   # the regular comes back more


def test_replay_from_the_document_reproduces_the_lasting_cost_bit_for_bit():
    """The decision document (JSON text) carries every input of the lasting cost.

    Replaying it gives the same rationale rows, lasting_cost_s included, to the last bit.
    """
    from helpaware_node import wire
    from helpaware_node.core import decide
    model = SiteModel(ask_memory_half_life_s=86400.0, k_load=1.1)
    config = DecisionConfig(lookahead_horizon_s=40000.0)
    now = 3e5
    need = HelpNeed("r9", "door", now, continue_cost_s=140.0, help_time_s=20.0)
    cands = [Candidate("a", 2.0, now, Belief(5.0, 2.0), 0.3, "", (now - 5e4, now - 2e4), 9,
                       now - 4 * 86400.0),
             Candidate("b", 1.0, now, Belief(1.5, 1.5), 0.2, "", (), 2, now - 7200.0)]
    d = decide(need, cands, now, [now - 100.0], model, config)
    text = wire.decision_text(d, [now - 100.0], model, config, robot_id="r")
    doc = wire.decode("decision", text)
    again = decide(*wire.replay_inputs(doc), *wire.recorded_params(doc))
    assert [r["lasting_cost_s"] for r in doc["rationale"]] == \
        [r["lasting_cost_s"] for r in again.rationale()]
    assert doc["rationale"] == again.rationale()
    assert max(r["lasting_cost_s"] for r in doc["rationale"]) > 0.0


def test_an_older_document_without_the_field_still_validates():
    from helpaware_node import wire
    model, config = SiteModel(), DecisionConfig()
    now = 1e4
    d = decide_one(model, config, now)
    doc = wire.decision_to_document(d, [], model, config)
    for row in doc["rationale"]:
        del row["lasting_cost_s"]
    wire.validate("decision", doc)


def decide_one(model, config, now):
    from helpaware_node.core import decide
    need = HelpNeed("r1", "door", now)
    return decide(need, [Candidate("a", 2.0, now, Belief(2.0, 2.0), 0.1)], now, [], model, config)


def test_a_person_in_view_at_every_need_weighs_at_most_the_robots_hourly_cap():
    """Seen at 500 needs in the last 10 h (50 an hour) by a robot that asks at most 3 an hour.

    N and the lasting cost use 3 / 3600 s, not 50 / 3600 s (the later asks where either can matter
    are at most the robot's own); the lasting cost is again the defining integral
    (scipy.integrate.quad) at that rate.
    """
    model = SiteModel()
    config = DecisionConfig(max_asks_per_hour=3)
    now = 1e6
    cand = Candidate("always", 2.0, now, Belief(4.0, 2.0), 0.2, "", (), 500, now - 36000.0)
    raw = float(encounter_rate_per_s(500, now - 36000.0, now, config))
    assert raw > 20.0 / 3600.0         # (500.1 / (28800 + 36000)) s^-1, about 28 an hour
    ev = evaluate(HelpNeed("r", "door", now), [cand], now, [], model, config)
    tau, horizon = config.future_discount_time_s, config.lookahead_horizon_s
    window = integrate.quad(lambda s: math.exp(-s / tau), 0.0, horizon)[0]
    assert ev.future_requests[0] == pytest.approx(3.0 / 3600.0 * window, rel=1e-9)
    alpha, beta, gamma = typical_terms(ev.mean, model, config, config.help_time_s)
    want = by_quadrature(3.0 / 3600.0, alpha[0], beta, gamma, model.k_load, ev.ask_load[0],
                         model.ask_memory_half_life_s, tau, horizon)
    assert ev.lasting_cost_s[0] == pytest.approx(want, rel=1e-7) and want > 0.0
