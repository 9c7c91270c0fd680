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

"""The simulator scores the world.

Its costs and truth, the site-informed constants, the oracles, site learning plumbing, paired
comparisons and the re-encounter check.
"""
from __future__ import annotations

import dataclasses
import json
import math
import os

from helpaware_node.core import DecisionConfig, SiteModel
from helpaware_node.core.model import params_hash
from helpaware_node.sim.compare import compare, mostly_regulars, regret
from helpaware_node.sim.encounters import check
from helpaware_node.sim.metrics import paired_difference
from helpaware_node.sim.oracle import TrueWorld
from helpaware_node.sim.run import run_policy
from helpaware_node.sim.scenario import ScenarioError, WorldCosts
from helpaware_node.sim.truth import (
    informed_config,
    logit_normal_moments,
    true_prior,
    true_site_model,
)
from helpaware_node.sim.world import build_world, SeenPerson, SimNeed, World
import numpy as np
import pytest
from scipy import integrate, stats
from sim_scenarios import scenario_from

BASE = {
    "name": "t",
    "shift": {"days": 3, "hours_per_day": 8.0},
    "needs": {"per_hour": 4.0, "kinds": [{"kind": "door", "continue_cost_s": 120.0,
                                          "help_time_s": 20.0}]},
    "people": {"regulars": 8, "regulars_per_need": 2.0, "strangers_per_need": 0.5,
               "max_distance_m": 7.5, "willingness": {"beta": [3.0, 2.0]},
               "stranger_willingness": {"beta": [1.0, 3.0]}},
    "activities": [{"name": "idle", "busyness": [0.0, 0.6], "mean_duration_s": 600.0}],
    "ground_truth": {"model": "ours", "k_busy": 2.0, "k_load": 1.0, "no_response_fraction": 0.3,
                     "ask_memory_half_life_s": 7200.0},
}


def scenario(**changes):
    return scenario_from(BASE, **changes)


# ------------------------------------------------------------------ the world's costs

def test_costs_default_to_the_shipped_decision_costs_and_are_checked():
    config = DecisionConfig()
    costs = scenario().costs
    assert (costs.ask_time_s, costs.interruption_weight_s, costs.busy_cost,
            costs.repeat_cost) == (config.ask_time_s, config.interruption_weight_s,
                                   config.busy_cost, config.repeat_cost)
    assert scenario(costs={"ask_time_s": 25.0}).costs.ask_time_s == 25.0
    with pytest.raises(ScenarioError, match=r"costs.busy_cost: -1.0 is outside"):
        scenario(costs={"busy_cost": -1.0})
    with pytest.raises(ScenarioError, match="costs: unknown field.*ask_time"):
        scenario(costs={"ask_time": 5.0})


WORLD_COSTS = {"ask_time_s": 7.0, "interruption_weight_s": 4.0, "busy_cost": 1.5,
               "repeat_cost": 3.0}
# a robot whose every cost and site constant is far from the world's (true half-life 7200 s)
WRONG_MODEL = SiteModel(prior_a=9.0, prior_b=1.0, k_busy=0.0, k_load=5.0,
                        ask_memory_half_life_s=60.0, notice_probability=0.3)
WRONG_CONFIG = DecisionConfig(ask_time_s=60.0, repeat_cost=0.0, interruption_weight_s=0.5,
                              busy_cost=0.0)


def world_reward_by_hand(res, true_half_life_s: float = 7200.0):
    """Return the world's reward and interruption cost of a run.

    Summed by hand from its decisions with the world's costs (WORLD_COSTS) and each ask's true load
    (plain algebra: 2^(-age/h) over the person's earlier asks, h the world's half-life), all needs
    a door (120 s, help 20 s). Also whether the robot's own interruption figure ever differed from
    the world's.
    """
    c = WORLD_COSTS
    past: dict = {}
    interruption, robot_differs = 0.0, False
    for d in (d for d in res.decisions if d.action == "ask"):
        t = d.evaluation.now_s
        x = float(d.evaluation.busyness[d.person_index])
        load = sum(2.0 ** (-(t - s) / true_half_life_s) for s in past.get(d.person_id, []))
        world_i = c["interruption_weight_s"] * (1.0 + c["busy_cost"] * x + c["repeat_cost"] * load)
        robot_differs |= abs(float(d.evaluation.interruption_s[d.person_index]) - world_i) > 1e-6
        interruption += world_i
        past.setdefault(d.person_id, []).append(t)
    total = res.helps * (120.0 - 20.0) - res.declines * c["ask_time_s"] - interruption
    return total, interruption, robot_differs


def test_reward_is_the_worlds_whatever_the_robot_believes():
    """The nearest-person policy ignores costs and constants.

    So robots with different parameters make the same asks; the reward is the world's either way.
    """
    sc = scenario(costs=WORLD_COSTS)
    world = build_world(sc, 4)
    runs = [run_policy(world, "nearest", model, cfg, keep_decisions=True)
            for model, cfg in ((SiteModel(), DecisionConfig()), (WRONG_MODEL, WRONG_CONFIG))]
    assert runs[0].reward_s.tobytes() == runs[1].reward_s.tobytes()
    assert runs[0].interruption_s == runs[1].interruption_s
    res = runs[0]
    expected, interruption, _ = world_reward_by_hand(res)
    assert res.interruption_s == pytest.approx(interruption, rel=1e-12)
    assert res.helps > 0 and res.declines > 0
    assert res.reward_s.sum() == pytest.approx(expected, rel=1e-12)
    # the second half is the needs at or after half the run's length
    half = res.times_s >= 1.5 * 86400.0
    assert res.second_half_reward_s == pytest.approx(res.reward_s[half].sum())


@pytest.mark.parametrize("model,config", [(SiteModel(), DecisionConfig()),
                                          (WRONG_MODEL, WRONG_CONFIG)])
def test_ours_is_paid_the_worlds_costs_not_its_own(model, config):
    """Our policy decides with the robot's costs and constants.

    But each ask is paid at the world's: the hand sum with the world's costs and the true load
    matches, while the robot's own interruption figure differs from the world's (so the check can
    tell them apart).
    """
    world = build_world(scenario(costs=WORLD_COSTS), 5)
    res = run_policy(world, "ours", model, config, keep_decisions=True)
    expected, interruption, robot_differs = world_reward_by_hand(res)
    assert res.asks > 10 and robot_differs
    assert res.interruption_s == pytest.approx(interruption, rel=1e-12)
    assert res.reward_s.sum() == pytest.approx(expected, rel=1e-12)


def test_the_oracles_do_not_read_the_robots_parameters():
    """The oracles score with the world's truth and costs.

    a robot with other costs and constants (same hard limits) makes the same asks and is paid the
    same, to the bit.
    """
    world = build_world(scenario(costs=WORLD_COSTS), 6)
    for policy in ("oracle", "oracle_greedy"):
        a, b = (run_policy(world, policy, m, c) for m, c in
                ((SiteModel(), DecisionConfig()), (WRONG_MODEL, WRONG_CONFIG)))
        assert a.asks > 0 and a.asks == b.asks and a.asks_by_person == b.asks_by_person
        assert a.reward_s.tobytes() == b.reward_s.tobytes()
        assert a.interruption_s == b.interruption_s


# ------------------------------------------------------------------ site-informed constants

def test_true_prior_matches_the_pooled_willingness_moments():
    """Regulars Beta(3, 2) (8 people) and strangers Beta(1, 3) (expected 0.5 * 4 * 8 * 3 = 48).

    The pooled mean and variance by the law of total variance over scipy.stats.beta's moments, and
    the matched Beta has exactly those (scipy.stats.beta.stats).
    """
    sc = scenario()
    a0, b0 = true_prior(sc)
    groups = [(8.0, stats.beta(3.0, 2.0)), (48.0, stats.beta(1.0, 3.0))]
    n = sum(g[0] for g in groups)
    mean = sum(g[0] * g[1].mean() for g in groups) / n
    var = sum(g[0] * (g[1].var() + g[1].mean() ** 2) for g in groups) / n - mean ** 2
    m, v = stats.beta.stats(a0, b0, moments="mv")
    assert float(m) == pytest.approx(mean, rel=1e-12)
    assert float(v) == pytest.approx(var, rel=1e-10)


def test_logistic_truth_moments_by_quadrature():
    """Check E[w] and E[w^2] of the logistic truth against quadrature.

    E[w], E[w^2] of w = logistic(logit 0.3 + 1.2 z) against scipy.integrate.quad over the normal
    density (scipy.stats.norm).
    """
    m1, m2 = logit_normal_moments(0.3, 1.2)
    w = lambda z: 1.0 / (1.0 + math.exp(-(math.log(0.3 / 0.7) + 1.2 * z)))  # noqa: E731
    q1 = integrate.quad(lambda z: w(z) * stats.norm.pdf(z), -40, 40)[0]
    q2 = integrate.quad(lambda z: w(z) ** 2 * stats.norm.pdf(z), -40, 40)[0]
    assert (m1, m2) == pytest.approx((q1, q2), rel=1e-10)


def test_informed_uses_the_truth_and_the_worlds_costs_only():
    sc = scenario(costs={"ask_time_s": 12.0})
    model = true_site_model(sc, SiteModel(default_busyness=0.4, evidence_half_life_s=99.0))
    assert (model.k_busy, model.k_load, model.ask_memory_half_life_s) == (2.0, 1.0, 7200.0)
    assert model.notice_probability == 1.0          # a silence is as informative as a decline
    assert (model.default_busyness, model.evidence_half_life_s) == (0.4, 99.0)  # the robot's
    config = informed_config(sc, DecisionConfig(max_asks_per_hour=5))
    assert config.ask_time_s == 12.0 and config.max_asks_per_hour == 5
    # `informed` is `ours` run on exactly those values
    world = build_world(sc, 1)
    a = run_policy(world, "informed", SiteModel(), DecisionConfig())
    b = run_policy(world, "ours", true_site_model(sc), informed_config(sc, DecisionConfig()))
    assert a.reward_s.tobytes() == b.reward_s.tobytes() and a.asks == b.asks


def test_constants_true_starts_every_policy_from_the_truth():
    sc = scenario(shift__days=2)
    summary, per_seed, _ = compare(sc, ["ours", "informed"], seeds=2, progress=False,
                                   constants="true")
    assert per_seed["ours"] == per_seed["informed"]
    lost = regret(per_seed)
    assert lost["whole"]["mean"] == 0.0 and lost["second_half"]["mean"] == 0.0


# ------------------------------------------------------------------ the oracles

def _tiny_world(times, k_load=1.0, h=3600.0):
    """One person p (w = 1, never busy) alone at needs at `times`.

    The world's interruption cost 0 and t_ask 10, so a true advantage is p (C - t_help) - (1 - p)
    10, p = e^(-k f).
    """
    sc = scenario(ground_truth={"model": "ours", "k_busy": 0.0, "k_load": k_load,
                                "ask_memory_half_life_s": h, "no_response_fraction": 0.0},
                  costs={"interruption_weight_s": 0.0, "ask_time_s": 10.0})
    needs = [SimNeed(f"n{j}", t, "door", 100.0, 20.0, (SeenPerson("p", 1.0, 0.0, "idle"),),
                     (0.5,), (0.5,)) for j, t in enumerate(times)]
    return World(sc, 0, needs, {"p": 1.0}, {"p": list(range(len(times)))})


def test_oracle_lasting_cost_is_the_greedy_rollout_by_hand():
    """Now t = 1000; p is met again at 2800 and 8200 (h = 3600 s, k_load = 1).

    Without an ask now the greedy oracle asks at 2800 (load 0) and at 8200 (load 2^-1.5); with one,
    the loads are 2^-0.5 and 2^-2 + 2^-1.5. The lasting cost is the difference.
    """
    world = _tiny_world([1000.0, 2800.0, 8200.0])
    truth = TrueWorld(world, DecisionConfig())
    truth.need_index = 0

    def adv(load):
        p = math.exp(-load)
        return p * 80.0 - (1.0 - p) * 10.0
    without = adv(0.0) + adv(2.0 ** -1.5)
    with_ask = adv(2.0 ** -0.5) + adv(2.0 ** -2 + 2.0 ** -1.5)
    assert truth.lasting_cost("p", 1000.0) == pytest.approx(without - with_ask, rel=1e-12)
    # greedy: the advantage now only; the look-ahead score subtracts the lasting cost
    assert truth.advantage("p", 0.0, 0.0, world.needs[0]) == pytest.approx(80.0)


def test_oracle_counts_the_reask_interval_it_fills():
    """Met again 600 s later, inside the 900 s re-ask interval.

    With an ask now the oracle could not ask there, so the whole advantage there is lost.
    """
    world = _tiny_world([1000.0, 1600.0], k_load=0.0)
    truth = TrueWorld(world, DecisionConfig(min_reask_interval_s=900.0))
    assert truth.lasting_cost("p", 1000.0) == pytest.approx(80.0)


def test_oracle_beats_its_greedy_self_on_a_long_ask_memory():
    """Twenty regulars who remember an ask for a day.

    On the same worlds the look-ahead oracle, which counts the load it leaves, saves more than the
    greedy one.
    """
    sc = scenario(people__regulars=20, people__regulars_per_need=1.5,
                  people__strangers_per_need=0.0, shift__days=6,
                  ground_truth={"model": "ours", "k_busy": 2.0, "k_load": 1.5,
                                "ask_memory_half_life_s": 86400.0,
                                "no_response_fraction": 0.2})
    _, per_seed, _ = compare(sc, ["oracle", "oracle_greedy"], seeds=3, progress=False)
    diff = paired_difference([m["reward_s"] for m in per_seed["oracle"]],
                             [m["reward_s"] for m in per_seed["oracle_greedy"]])
    assert diff["mean"] > 0.0


# ------------------------------------------------------------------ site learning plumbing

class SwitchAfter:
    """A stand-in site learner: due once `k` outcomes were stored.

    Then 'refits' to fixed constants (accepted or not). Records what it was given.
    """

    def __init__(self, k: int, model: SiteModel, accept: bool = True):
        self.k, self.model, self.accept = k, model, accept
        self.calls: list = []

    def due(self, new_outcomes: int, now_s: float) -> bool:
        return not self.calls and new_outcomes >= self.k

    def refit(self, outcomes, asks, now_s):
        self.calls.append((len(outcomes), len(asks), now_s,
                           all(o.time_s <= now_s for o in outcomes)))
        accepted, model = self.accept, self.model

        class Refit:
            pass
        r = Refit()
        r.accepted, r.reason, r.model = accepted, "stand-in", model if accepted else None
        return r


def test_an_accepted_refit_is_put_in_force_and_a_refused_one_changes_nothing():
    sc = scenario(shift__days=2)
    world = build_world(sc, 3)
    config = DecisionConfig()
    target = dataclasses.replace(SiteModel(), prior_a=1.0, prior_b=3.0, k_busy=4.0)
    learner = SwitchAfter(15, target)
    res = run_policy(world, "ours", SiteModel(), config, keep_decisions=True, learner=learner)
    [(n_out, n_asks, when, ordered)] = learner.calls
    assert n_out >= 15 and n_asks >= n_out and ordered
    before = [d for d in res.decisions if d.evaluation.now_s <= when]
    after = [d for d in res.decisions if d.evaluation.now_s > when]
    assert before and after
    old, new = params_hash(SiteModel(), config), params_hash(target, config)
    assert {d.evaluation.params_hash for d in before} == {old}
    assert {d.evaluation.params_hash for d in after} == {new}
    assert res.refits == [(when, True, target)]
    # every ask the run made up to then was answered and stored: the counts match
    asks_then = sum(d.action == "ask" for d in before)
    assert n_asks == asks_then and n_out == asks_then
    refused = run_policy(world, "ours", SiteModel(), config,
                         learner=SwitchAfter(15, target, accept=False))
    plain = run_policy(world, "ours", SiteModel(), config)
    assert refused.reward_s.tobytes() == plain.reward_s.tobytes()
    assert [r[1] for r in refused.refits] == [False]


class ProposeOnly(SwitchAfter):
    """Accepted but not applied (the site learner's `propose` mode).

    The constants in force stay the file's, so the run must not switch.
    """

    def refit(self, outcomes, asks, now_s):
        r = super().refit(outcomes, asks, now_s)
        r.applied = False
        return r


def test_a_proposal_that_is_not_applied_changes_nothing():
    world = build_world(scenario(shift__days=2), 3)
    target = dataclasses.replace(SiteModel(), prior_a=1.0, prior_b=3.0, k_busy=4.0)
    learner = ProposeOnly(15, target)
    res = run_policy(world, "ours", SiteModel(), DecisionConfig(), learner=learner)
    plain = run_policy(world, "ours", SiteModel(), DecisionConfig())
    assert learner.calls and [r[1] for r in res.refits] == [False]
    assert res.reward_s.tobytes() == plain.reward_s.tobytes()


def test_the_site_learner_plugs_in_when_present():
    """helpaware_node.fit.online (the site-learning branch) through the run's hook.

    Refits are made on the run's own events, and once one is applied the decisions carry its
    constants, each inside the learner's ranges. Skipped where that module is not installed.
    """
    online = pytest.importorskip("helpaware_node.fit.online")
    world = build_world(scenario(shift__days=3), 2)
    learner = online.SiteLearner(SiteModel(), online.LearningSettings(
        mode="apply", every_outcomes=20, prior_weight=20.0))
    res = run_policy(world, "ours", SiteModel(), DecisionConfig(), keep_decisions=True,
                     learner=learner)
    applied = [(t, m) for t, ok, m in res.refits if ok]
    assert res.refits and applied
    t_first, model = applied[0]
    for name, (low, high) in online.MODEL_RANGES.items():
        assert low <= getattr(model, name) <= high
    after = {d.evaluation.params_hash for d in res.decisions if d.evaluation.now_s > t_first}
    assert params_hash(SiteModel(), DecisionConfig()) not in after


def test_compare_adds_the_learning_row():
    sc = scenario(shift__days=1)
    summary, per_seed, runs = compare(sc, ["ours", "never"], seeds=2, progress=False,
                                      learner_factory=lambda: SwitchAfter(5, SiteModel()))
    assert list(summary) == ["ours", "learning", "never"]
    assert all(r.policy == "learning" and r.refits for r in runs["learning"])


# ------------------------------------------------------------------ comparisons

def test_paired_difference_is_the_paired_t_interval():
    """Against scipy.stats.ttest_rel's confidence interval of the mean difference."""
    x = [10.0, 12.0, 9.5, 14.0, 11.0, 13.5]
    y = [9.0, 11.5, 9.0, 12.0, 10.5, 12.0]
    got = paired_difference(x, y)
    lo, hi = stats.ttest_rel(x, y).confidence_interval(0.95)
    assert got["mean"] - got["ci95"] == pytest.approx(lo)
    assert got["mean"] + got["ci95"] == pytest.approx(hi)
    assert got["verdict"] == "met"
    assert paired_difference(y, x)["verdict"] == "missed"
    assert paired_difference(x, y, ratio=1.1)["verdict"] in ("undecided", "missed")
    # x >= 0.9 y seed by seed: the differences x - 0.9 y
    scaled = paired_difference(x, y, ratio=0.9)
    assert scaled["mean"] == pytest.approx(np.mean(np.array(x) - 0.9 * np.array(y)))


def test_sites_of_regulars():
    assert mostly_regulars(scenario())                       # 2.0 regulars, 0.5 strangers
    assert not mostly_regulars(scenario(people__strangers_per_need=3.0))


# ------------------------------------------------------------------ re-encounter check

def test_strangers_are_never_met_again_and_the_robot_now_knows_it():
    sc = scenario(people__regulars=0, people__regulars_per_need=0.0,
                  people__strangers_per_need=2.0)
    result = check(sc, DecisionConfig(), seeds=1)
    cell = result[("stranger", "1st")]
    assert cell["real_n"] == 0.0
    config = DecisionConfig()
    tau = config.future_discount_time_s
    prior_n = config.prior_candidate_rate_per_day / 86400.0 * tau * (
        1 - math.exp(-config.lookahead_horizon_s / tau))
    assert cell["robot_n"] == pytest.approx(prior_n) and prior_n < 0.05
    assert result["prior"]["seen_again"] == 0.0
    assert ("regular", "all") not in result


def test_regulars_come_back_and_the_check_counts_it():
    result = check(scenario(people__strangers_per_need=0.0), DecisionConfig(), seeds=1)
    assert result[("regular", "all")]["real_n"] > 0.1
    assert result[("regular", "21st+")]["robot_n"] > 5 * result[("regular", "1st")]["robot_n"]


def test_the_check_compares_n_with_the_discounted_real_later_encounters():
    """One person met at 1000, 2800, 8200 s and near the end of a 3-day run.

    At each encounter the robot's N is the Gamma-Poisson mean (0.3 / day over 8 h prior, k earlier
    encounters since first seen) times tau (1 - e^(-H/tau)), and the real figure is sum e^(-dt/tau)
    over later encounters within H (plain algebra); the last encounter, whose horizon passes the
    end of the run, is left out.
    """
    from helpaware_node.sim.encounters import encounter_rows
    end = 3 * 86400.0
    times = [1000.0, 2800.0, 8200.0, end - 100.0]
    world = _tiny_world(times)
    config = DecisionConfig()
    tau, horizon = config.future_discount_time_s, config.lookahead_horizon_s
    rows = encounter_rows(world, config)
    assert [r[:2] for r in rows] == [("regular", 0), ("regular", 1), ("regular", 2)]
    for k, (_, _, robot_n, real) in enumerate(rows):
        rate = (0.3 * 28800.0 / 86400.0 + k) / (28800.0 + times[k] - times[0])
        assert robot_n == pytest.approx(rate * tau * (1.0 - math.exp(-horizon / tau)),
                                        rel=1e-12)
        later = [t - times[k] for t in times[k + 1:] if t - times[k] <= horizon]
        assert real == pytest.approx(sum(math.exp(-dt / tau) for dt in later), rel=1e-12)
    assert rows[2][3] == 0.0 and rows[0][3] > rows[1][3] > 0.0


def test_simulate_reports_the_regret_of_not_knowing_the_site(tmp_path, capsys):
    from helpaware_node import cli
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    code = cli.main(["simulate", os.path.join(root, "scenarios", "research_lab_quiet.yaml"),
                     "--seeds", "2", "--policies", "ours", "informed", "--no-plots",
                     "--quiet", "--out", str(tmp_path)])
    out = capsys.readouterr().out
    assert code == 0
    assert "regret of not knowing the site (whole run)" in out
    assert "regret of not knowing the site (second half)" in out
    assert "site's true constants (policy informed): prior Beta(3, 2)" in out
    doc = json.loads((tmp_path / "results.json").read_text())
    ours = [m["reward_s"] for m in doc["per_seed"]["ours"]]
    informed = [m["reward_s"] for m in doc["per_seed"]["informed"]]
    assert doc["regret"]["whole"]["mean"] == pytest.approx(np.mean(informed) - np.mean(ours))
    assert doc["true_constants"]["k_busy"] == 1.5
    code = cli.main(["simulate", os.path.join(root, "scenarios", "research_lab_quiet.yaml"),
                     "--seeds", "1", "--encounters"])
    assert code == 0 and "re-encounter check" in capsys.readouterr().out


def test_world_interruption_cost_formula():
    """I = weight (1 + busy_cost x + repeat_cost f) with the shipped 6, 3, 2: x = 0.5, f = 2."""
    assert WorldCosts().interruption_s(0.5, 2.0) == pytest.approx(6.0 * (1 + 1.5 + 4.0))
