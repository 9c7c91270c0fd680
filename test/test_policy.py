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

"""The one-step look-ahead decision: formulas, limits and rationale."""
import math

from helpaware_node.core import (
    Belief,
    Candidate,
    CoreInputError,
    decide,
    DecisionConfig,
    evaluate,
    Exclusion,
    HelpNeed,
    information_value,
    SiteModel,
)
from helpaware_node.core.policy import future_requests, typical_gain
import numpy as np
import pytest

NEED = HelpNeed("r1", "door", opened_at_s=1000.0)


def cand(pid, a=2.0, b=2.0, x=0.0, d=2.0, seen=1000.0, **kw):
    return Candidate(person_id=pid, distance_m=d, observed_at_s=seen, belief=Belief(a, b),
                     busyness=x, **kw)


def kg_beta_bernoulli(a, b, m_star):
    # Knowledge gradient of a Beta-Bernoulli option (Frazier, Powell and Dayanik 2008;
    # Powell and Ryzhov 2012, ch. 5; formula as given in test/data/REFERENCE_VALUES.md).
    mu = a / (a + b)
    return (mu * max(m_star, (a + 1) / (a + b + 1)) + (1 - mu) * max(m_star, a / (a + b + 1))
            - max(m_star, mu))


@pytest.mark.parametrize("a,b,m_star,published", [
    (1.0, 1.0, 0.5, 1 / 12), (1.0, 1.0, 0.6, 1 / 30), (2.0, 2.0, 0.55, 0.025)])
def test_information_value_is_gain_times_knowledge_gradient(a, b, m_star, published):
    # Published values: test/data/REFERENCE_VALUES.md (knowledge gradient, Beta-Bernoulli).
    assert kg_beta_bernoulli(a, b, m_star) == pytest.approx(published, abs=1e-12)
    # With c = 1 (no busyness, no load, typical busyness 0): U(m) = G max(0, m - m*), with
    # gain G = Cbar - t_help + t_ask and threshold m* = (t_ask + Ibar) / G; so VOI = G * KG.
    model = SiteModel(k_busy=2.0, k_load=1.0)
    t_ask, t_help = 10.0, 20.0
    gain = 120.0 - t_help + t_ask
    ibar = m_star * gain - t_ask   # choose Ibar so the threshold is m*
    config = DecisionConfig(typical_busyness=0.0, typical_continue_cost_s=120.0,
                            help_time_s=t_help, ask_time_s=t_ask, interruption_weight_s=ibar)
    voi = information_value(np.array([a]), np.array([b]), np.array([1.0]), model, config, t_help)
    assert float(voi[0]) == pytest.approx(gain * published, rel=1e-10)


def test_advantage_formula_and_context():
    model = SiteModel(k_busy=2.0, k_load=0.7)
    config = DecisionConfig()
    ev = evaluate(NEED, [cand("x", a=3, b=1, x=0.4, ask_times_s=(1000.0 - 1800.0,))],
                  1000.0, [], model, config)
    load = 0.5   # one ask exactly one half-life ago
    c = math.exp(-(2.0 * 0.4 + 0.7 * load))
    p = c * 0.75
    interruption = 6.0 * (1 + 3.0 * 0.4 + 2.0 * load)
    adv = p * (90.0 - 20.0) - (1 - p) * 10.0 - interruption
    assert ev.ask_load[0] == pytest.approx(load)
    assert ev.c[0] == pytest.approx(c)
    assert ev.p[0] == pytest.approx(p)
    assert ev.interruption_s[0] == pytest.approx(interruption)
    assert ev.advantage_s[0] == pytest.approx(adv)
    assert ev.lasting_cost_s[0] > 0.0      # test_lasting_cost.py checks its value
    assert ev.score_s[0] == pytest.approx(adv + ev.future_requests[0] * ev.voi_s[0]
                                          - ev.lasting_cost_s[0])


def test_prefers_willing_free_person_and_reports_rationale():
    model, config = SiteModel(), DecisionConfig()
    people = [cand("busy", a=8, b=2, x=0.7), cand("free", a=8, b=2, x=0.05)]
    d = decide(NEED, people, 1000.0, [], model, config)
    assert d.action == "ask" and d.person_id == "free"
    rows = {r["person_id"]: r for r in d.rationale()}
    assert rows["free"]["score_s"] > rows["busy"]["score_s"]
    for key in ("p", "mean", "a", "b", "c", "advantage_s", "voi_s", "future_requests",
                "lasting_cost_s", "score_s"):
        assert key in rows["free"]
    assert d.evaluation.params_hash and len(d.evaluation.params_hash) == 16


def test_continue_when_nobody_is_worth_asking():
    model, config = SiteModel(), DecisionConfig()
    d = decide(HelpNeed("r", "door", 0.0, continue_cost_s=5.0), [cand("x", a=1, b=30, seen=0.0)],
               0.0, [], model, config)
    assert d.action == "continue" and d.why == "no_positive_score"
    empty = decide(NEED, [], 1000.0, [], model, config)
    assert empty.action == "continue" and empty.why == "no_candidates"


@pytest.mark.parametrize("kwargs,expected", [
    ({"opted_out": True}, Exclusion.OPTED_OUT),
    ({"activity": "with_patient"}, Exclusion.PROTECTED_ACTIVITY),
    ({"seen": 990.0}, Exclusion.STALE_OBSERVATION),
    ({"d": 20.0}, Exclusion.TOO_FAR),
    ({"x": 0.9}, Exclusion.TOO_BUSY),
    ({"ask_times_s": (700.0,)}, Exclusion.REASK_INTERVAL),
    ({"ask_times_s": (-50000.0, -40000.0, -30000.0)}, Exclusion.PERSON_DAILY_CAP),
])
def test_each_hard_limit_excludes_with_its_reason(kwargs, expected):
    model, config = SiteModel(), DecisionConfig()
    d = decide(NEED, [cand("x", a=50, b=1, **kwargs)], 1000.0, [], model, config)
    assert d.action == "continue" and d.why == "all_excluded"
    assert d.rationale()[0]["excluded"] == expected.value


def test_robot_hourly_cap():
    config = DecisionConfig(max_asks_per_hour=2)
    d = decide(NEED, [cand("x", a=50, b=1)], 1000.0, [100.0, 900.0], SiteModel(), config)
    assert d.rationale()[0]["excluded"] == "robot_hourly_cap"
    d2 = decide(NEED, [cand("x", a=50, b=1)], 1000.0, [-3000.0, 900.0], SiteModel(), config)
    assert d2.action == "ask"


def test_tie_goes_to_the_nearer_then_to_the_id():
    people = [cand("b", d=3.0), cand("a", d=3.0), cand("c", d=1.0)]
    model, config = SiteModel(), DecisionConfig()
    d = decide(NEED, people, 1000.0, [], model, config)
    assert d.person_id == "c"
    d2 = decide(NEED, people[:2], 1000.0, [], model, config)
    assert d2.person_id == "a"


def test_request_overrides_and_urgency():
    config = DecisionConfig()
    assert config.continue_cost_s("door", 0.5) == pytest.approx(90.0 * 1.5)
    assert config.continue_cost_s("unknown_kind") == 120.0
    ev = evaluate(HelpNeed("r", "door", 0.0, continue_cost_s=33.0, help_time_s=4.0),
                  [cand("x", seen=0.0)], 0.0, [], SiteModel(), config)
    assert ev.continue_cost_s == 33.0 and ev.help_time_s == 4.0


@pytest.mark.parametrize("build", [
    lambda: cand("x", x=math.nan), lambda: cand("x", x=1.2), lambda: cand("x", x=-0.1),
    lambda: cand("x", d=-1.0), lambda: cand("", x=0.1),
    lambda: HelpNeed("r", "door", 0.0, urgency=2.0),
    lambda: HelpNeed("r", "door", 0.0, continue_cost_s=-5.0),
    lambda: HelpNeed("", "door", 0.0),
    lambda: DecisionConfig(ask_time_s=math.nan),
    lambda: DecisionConfig(max_asks_per_hour=2.5),
    lambda: DecisionConfig(continue_costs_s={"door": -1.0}),
])
def test_bad_input_is_refused_with_a_named_field(build):
    with pytest.raises(CoreInputError) as err:
        build()
    assert ":" in str(err.value)   # "<field>: <what is wrong>"


def test_missing_busyness_uses_site_default():
    model = SiteModel(default_busyness=0.4)
    ev = evaluate(NEED, [cand("x", x=None)], 1000.0, [], model, DecisionConfig())
    assert ev.busyness[0] == 0.4


def test_config_is_immutable():
    config = DecisionConfig()
    with pytest.raises(TypeError):
        config.continue_costs_s["door"] = 1.0
    with pytest.raises(Exception):
        config.ask_time_s = 3.0


def test_typical_gain_never_negative():
    u = typical_gain(np.linspace(0, 1, 11), SiteModel(), DecisionConfig(), 20.0)
    assert np.all(u >= 0) and u[0] == 0.0


def test_reask_interval_holds_beyond_a_day():
    # issue 14 item 7: with a 48 h interval and one ask 25 h ago the person was asked
    config = DecisionConfig(min_reask_interval_s=172800.0)
    now = 1000.0 + 25 * 3600.0
    need = HelpNeed("r1", "door", opened_at_s=now, continue_cost_s=5000.0)
    asked_25h_ago = cand("p", seen=now, ask_times_s=(1000.0,))
    d = decide(need, [asked_25h_ago], now, [], SiteModel(), config)
    assert d.action == "continue"
    assert d.evaluation.exclusions[0] is Exclusion.REASK_INTERVAL
    later = now + 23 * 3600.0 + 1.0          # 48 h and 1 s after the ask
    d = decide(HelpNeed("r2", "door", later, continue_cost_s=5000.0),
               [cand("p", seen=later, ask_times_s=(1000.0,))], later, [], SiteModel(), config)
    assert d.action == "ask"


def test_reask_interval_is_bounded_at_30_days_by_name():
    from helpaware_node.core.model import MAX_REASK_INTERVAL_S
    assert MAX_REASK_INTERVAL_S == 30 * 86400.0
    longest = DecisionConfig(min_reask_interval_s=MAX_REASK_INTERVAL_S)
    assert longest.min_reask_interval_s == 2592000.0
    with pytest.raises(CoreInputError,
                       match=r"min_reask_interval_s: 2592001.0 is outside the allowed range "
                             r"\[0, 2.592e\+06\]"):
        DecisionConfig(min_reask_interval_s=MAX_REASK_INTERVAL_S + 1.0)


@pytest.mark.parametrize("count,span_s", [(0, 0.0), (1, 3600.0), (1, 10 * 86400.0),
                                          (12, 3 * 86400.0), (40, 600.0)])
def test_encounter_rate_is_the_gamma_poisson_posterior_mean(count, span_s):
    """N's rate is the Gamma-Poisson posterior mean.

    N's rate: Gamma(shape prior_rate * window / day, rate window) prior on the person's candidate
    rate, `count` encounters seen over `span_s` since first seen; the posterior mean by numerical
    integration (scipy.integrate.quad over scipy.stats densities).
    """
    from helpaware_node.core.policy import discounted_horizon_s, encounter_rate_per_s
    from scipy import integrate, stats
    config = DecisionConfig()
    shape = config.prior_candidate_rate_per_day * config.prior_rate_window_s / 86400.0
    scale = 1.0 / config.prior_rate_window_s

    def weight(lam):
        return stats.gamma.pdf(lam, shape, scale=scale) * stats.poisson.pmf(count, lam * span_s)
    hi = 5000.0 * (shape + count + 1.0) / (config.prior_rate_window_s + span_s)
    pieces = np.geomspace(1e-14, hi, 60)
    num = sum(integrate.quad(lambda lam: lam * weight(lam), a, b, limit=200)[0]
              for a, b in zip(np.r_[0.0, pieces[:-1]], pieces))
    den = sum(integrate.quad(weight, a, b, limit=200)[0]
              for a, b in zip(np.r_[0.0, pieces[:-1]], pieces))
    now = 1e6
    got = float(encounter_rate_per_s(count, now - span_s, now, config))
    assert got == pytest.approx(num / den, rel=1e-6)
    # N = rate * int_0^H e^(-s/tau) ds
    n = float(future_requests(count, now - span_s, now, config))
    tau, horizon = config.future_discount_time_s, config.lookahead_horizon_s
    assert n == pytest.approx(got * integrate.quad(lambda s: math.exp(-s / tau), 0, horizon)[0])
    assert discounted_horizon_s(config) == pytest.approx(tau * (1 - math.exp(-horizon / tau)))


def test_a_stranger_weighs_far_less_than_a_regular():
    """A stranger weighs far less than a regular.

    A first-seen person's N is the prior's (0.3 a day: most first-seen people are never seen
    again); someone seen 12 times in 3 days (12.1 / 80 h, 3.6 a day) weighs 12 times as much.
    """
    config = DecisionConfig()
    now = 5e5
    stranger = float(future_requests(0, now, now, config))
    regular = float(future_requests(12, now - 3 * 86400.0, now, config))
    assert stranger == pytest.approx(0.3 / 86400.0 * discounted_horizon(config))
    assert regular == pytest.approx(stranger * (12.1 / (80 * 3600.0)) / (0.3 / 86400.0))
    assert regular > 10 * stranger


def discounted_horizon(config):
    tau = config.future_discount_time_s
    return tau * (1 - math.exp(-config.lookahead_horizon_s / tau))
