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

"""Simulator: determinism, known answers, reward accounting, one decision code path."""
from __future__ import annotations

import copy
import json
import math
import os

from helpaware_node.core import (
    candidate_from_record,
    decide,
    DecisionConfig,
    HelpNeed,
    note_ask,
    note_outcome,
    OutcomeEvent,
    PersonRecord,
    Result,
    SiteModel,
)
from helpaware_node.core.baselines import choose_nearest
from helpaware_node.core.model import CoreInputError
from helpaware_node.core.person import DAY_S
from helpaware_node.session import HelpSession, SessionRules
from helpaware_node.sim.compare import compare
from helpaware_node.sim.metrics import gini, t_interval
from helpaware_node.sim.run import open_sim_need, run_policy, SIM_ROBOT_ID
from helpaware_node.sim.scenario import load, parse, ScenarioError
from helpaware_node.sim.world import build_world, SeenPerson, SimNeed
from helpaware_node.store import AskEvent, MemoryStore, StoredEvent
import numpy as np
import pytest
from scipy import stats
from sim_scenarios import scenario_from

BASE = {
    "name": "t",
    "shift": {"days": 3, "hours_per_day": 8.0},
    "needs": {"per_hour": 4.0, "kinds": [{"kind": "door", "continue_cost_s": 120.0,
                                          "help_time_s": 20.0}]},
    "people": {"regulars": 8, "regulars_per_need": 2.0, "strangers_per_need": 0.0,
               "max_distance_m": 7.5, "willingness": {"beta": [3.0, 2.0]}},
    "activities": [{"name": "idle", "busyness": 0.0, "mean_duration_s": 600.0}],
    "ground_truth": {"model": "ours", "k_busy": 2.0, "k_load": 0.0, "no_response_fraction": 0.0},
}


def scenario(**changes):
    return scenario_from(BASE, **changes)


def test_same_seed_same_results_to_the_last_digit():
    sc = parse({**_yaml("scenarios/hospital_night.yaml"),
                "shift": {"days": 2, "hours_per_day": 6.0}})
    one = compare(sc, seeds=2, progress=False)
    two = compare(sc, seeds=2, progress=False)
    assert json.dumps(one[1], sort_keys=True) == json.dumps(two[1], sort_keys=True)
    for p in one[2]:
        for r1, r2 in zip(one[2][p], two[2][p]):
            assert r1.reward_s.tobytes() == r2.reward_s.tobytes()
    # and a different seed really is a different world
    assert one[1]["ours"][0] != one[1]["ours"][1]


def test_seeds_in_parallel_processes_give_the_same_results_to_the_last_digit(tmp_path):
    # each seed is its own world, so `jobs` changes only where a seed runs. Run through the
    # command in fresh processes: compare() forks its workers, and a fork from a process
    # that holds other threads (as a test session does) can inherit a held lock
    import subprocess
    import sys
    results = {}
    for jobs in (1, 2):
        out = tmp_path / f"jobs{jobs}"
        proc = subprocess.run([sys.executable, "-m", "helpaware_node.cli", "simulate",
                               "research_lab_quiet", "--seeds", "3", "--jobs", str(jobs),
                               "--policies", "ours", "never", "oracle", "--no-plots",
                               "--quiet", "--out", str(out)],
                              capture_output=True, text=True, timeout=600)
        assert proc.returncode == 0, proc.stderr[-2000:]
        results[jobs] = json.loads((out / "results.json").read_text())["per_seed"]
    assert sorted(results[2]) == ["never", "oracle", "ours"]
    assert json.dumps(results[1], sort_keys=True) == json.dumps(results[2], sort_keys=True)
    sc = scenario()
    with pytest.raises(ValueError, match="jobs"):
        compare(sc, ["ours"], seeds=2, progress=False, jobs=0)


def _yaml(path):
    import yaml
    with open(path) as fh:
        return yaml.safe_load(fh)


def test_never_ask_loses_exactly_the_continue_costs():
    sc = scenario()
    world = build_world(sc, 3)
    res = run_policy(world, "never", SiteModel(), DecisionConfig())
    assert res.asks == 0 and res.helps == 0
    assert res.reward_s.sum() == 0.0  # reward is measured against continuing alone
    # exact algebra: every need costs its kind's continue cost, 120 s here
    assert res.continue_cost_s.sum() - res.reward_s.sum() == 120.0 * len(world.needs)


def test_fully_willing_never_busy_strangers_ours_and_oracle_ask_the_nearest():
    # Everyone a one-off stranger with w = 1 and busyness 0. Every candidate then has the same
    # belief (the prior, mean 0.5), x = 0 and no ask load, so all scores tie and the tie goes to
    # the nearer person. Asking pays: A = 0.5 (120 - 20) - 0.5 * 10 - 6 = 39 s > 0 for ours and
    # A = 1 * 100 - 6 = 94 s > 0 for the oracle. 4 needs/h stays under the 12 asks/h robot cap.
    sc = scenario(people__regulars=0, people__strangers_per_need=2.0,
                  people__willingness={"beta": [1e6, 1e-6]})
    world = build_world(sc, 5)
    for policy in ("ours", "oracle"):
        res = run_policy(world, policy, SiteModel(), DecisionConfig(), keep_decisions=True)
        with_people = [d for d in res.decisions if d.evaluation.candidates]
        assert len(with_people) > 40
        for d in with_people:
            dists = [c.distance_m for c in d.evaluation.candidates]
            assert d.action == "ask", policy
            assert d.evaluation.candidates[d.person_index].distance_m == min(dists)
        assert res.helps == res.asks == len(with_people)


def test_fully_willing_regulars_greedy_oracle_asks_nearest_eligible_and_ours_asks_every_time():
    # With regulars the hard limits (re-ask interval, daily cap) exclude some people; with no
    # repeat cost in the world and no true load effect every eligible person has the same
    # true advantage now, so the greedy oracle asks the nearest eligible one. Ours always
    # finds a positive score and asks.
    sc = scenario(people__willingness={"beta": [1e6, 1e-6]}, people__regulars=40,
                  costs={"repeat_cost": 0.0})
    world = build_world(sc, 2)
    config = DecisionConfig(repeat_cost=0.0)
    for policy in ("oracle_greedy", "ours"):
        res = run_policy(world, policy, SiteModel(k_load=0.0), config, keep_decisions=True)
        for d in res.decisions:
            nearest = choose_nearest(d.evaluation)
            if nearest is None:
                assert d.action == "continue"
                continue
            assert d.action == "ask", policy
            if policy == "oracle_greedy":
                assert d.person_index == nearest


def declines_until_asking_stops(model: SiteModel, config: DecisionConfig, cost_s: float,
                                help_s: float) -> int:
    """Return the smallest k of declines after which asking stops.

    Smallest k such that after k declines at c = 1 (belief Beta(a0, b0 + k), exact) both the
    advantage A is <= 0 with the least interruption (x = 0, f = 0) and the information value is 0
    (U(mean after a help) = 0 makes every U term 0). Beliefs only fall from there.
    """
    cbar = math.exp(-model.k_busy * config.typical_busyness)
    g = cbar * (config.typical_continue_cost_s - help_s + config.ask_time_s)
    ibar = config.interruption_weight_s * (1 + config.busy_cost * config.typical_busyness)
    k = 0
    while True:
        a, b = model.prior_a, model.prior_b + k
        m, m_helped = a / (a + b), (a + 1) / (a + b + 1)
        adv = m * (cost_s - help_s + config.ask_time_s) - config.ask_time_s \
            - config.interruption_weight_s
        if adv <= 0 and g * m_helped - config.ask_time_s - ibar <= 0:
            return k
        k += 1


def test_nobody_willing_ours_learns_to_stop_asking():
    # w ~ 0, busyness 0, the robot's k_load = 0: every ask is declined at c = 1, so each
    # decline is exactly b <- b + 1 (DESIGN section 3). With the defaults (prior 2/2, t_help
    # 20, t_ask 10, I >= 6, C = 120): A <= 0 once 2/(4+k) * 110 <= 16, i.e. k >= 10; the
    # information value is 0 once 3/(5+k) <= (10 + 11.4)/(e^-0.6 * 110) = 0.3545, i.e. k >= 4.
    # So no person is asked more than 10 times, ever. The daily cap (3) spreads that over >= 4
    # days; after 8 of 12 days nobody is asked any more.
    model, config = SiteModel(k_load=0.0), DecisionConfig()
    bound = declines_until_asking_stops(model, config, 120.0, 20.0)
    assert bound == 10
    sc = scenario(people__willingness={"beta": [1e-6, 1e6]}, shift__days=12)
    world = build_world(sc, 1)
    res = run_policy(world, "ours", model, config, keep_decisions=True)
    assert res.helps == 0 and res.asks > 0
    assert max(res.asks_by_person.values()) <= bound
    late = [d for d in res.decisions if d.action == "ask" and d.evaluation.now_s >= 8 * DAY_S]
    assert late == []
    # the nearest-person baseline keeps asking on the same world
    near = run_policy(world, "nearest", model, config)
    assert near.asks > 2 * res.asks


def test_reward_is_the_decision_cost_terms():
    sc = scenario(people__willingness={"beta": [2.0, 2.0]}, ground_truth__no_response_fraction=0.3)
    world = build_world(sc, 4)
    config = DecisionConfig()
    res = run_policy(world, "nearest", SiteModel(), config, keep_decisions=True)
    asked = [d for d in res.decisions if d.action == "ask"]
    interruption = sum(float(d.evaluation.interruption_s[d.person_index]) for d in asked)
    expected = res.helps * (120.0 - 20.0) - res.declines * config.ask_time_s - interruption
    assert res.helps > 0 and res.declines > 0 and res.no_responses > 0
    assert res.reward_s.sum() == pytest.approx(expected, rel=1e-12)


def test_simulator_decision_equals_core_decide_for_a_scripted_need():
    """The simulator's session, given a store with some history.

    Decides as core.decide does on records built by the core's own functions (note_ask,
    note_outcome).
    """
    model, config = SiteModel(), DecisionConfig()
    store = MemoryStore(robot_id=SIM_ROBOT_ID)
    k1, k2 = store.key_for("p1"), store.key_for("p2")
    # some history: p1 helped once, p2 declined once while busy; both asks by this robot
    store.append(StoredEvent("sim/1", k1, 100.0, Result.HELPED, 0.2, 0.0))
    store.append(StoredEvent("sim/2", k2, 200.0, Result.DECLINED, 0.6, 0.0))
    store.append_asks([AskEvent("sim/3", k1, 100.0), AskEvent("sim/4", k2, 200.0)])
    r1 = note_outcome(note_ask(PersonRecord.new(model), 100.0, model),
                      OutcomeEvent(100.0, Result.HELPED, 0.2, 0.0, "x/1"), model)
    r2 = note_outcome(note_ask(PersonRecord.new(model), 200.0, model),
                      OutcomeEvent(200.0, Result.DECLINED, 0.6, 0.0, "x/2"), model)
    session = HelpSession(store, model, config, now_s=2000.0)
    seen = (SeenPerson("p1", 3.0, 0.4, "charting"), SeenPerson("p2", 1.0, 0.1, "idle"),
            SeenPerson("p3", 2.0, 0.9, "with_patient"))
    need = SimNeed("need-7", 2000.0, "door", 150.0, 15.0, seen, (0.5,), (0.5,))
    cands = [candidate_from_record(s.person_id, {"p1": r1, "p2": r2}.get(
        s.person_id, PersonRecord.new(model)), 2000.0, model, s.distance_m, 2000.0, s.busyness,
        s.activity) for s in seen]
    direct = decide(HelpNeed("need-7", "door", 2000.0, continue_cost_s=150.0, help_time_s=15.0),
                    cands, 2000.0, [100.0, 200.0], model, config)
    [out] = open_sim_need(session, need).decisions
    sim = out.decision
    assert out.robot_ask_times_s == (100.0, 200.0)          # loaded from the store
    assert (sim.action, sim.person_id, sim.why) == (direct.action, direct.person_id, direct.why)
    assert sim.rationale() == direct.rationale()
    assert sim.evaluation.params_hash == direct.evaluation.params_hash
    assert direct.rationale()[2]["excluded"] == "protected_activity"


def test_simulator_asks_again_after_a_decline_as_the_node_does():
    """Nobody ever helps (w ~ 0).

    At every need with two or more eligible people the session asks twice (max_asks_per_need 2, the
    node's default), never the same person twice, and the second ask uses the need's second draw
    pair; with max_asks_per_need 1, once.
    """
    sc = scenario(people__willingness={"beta": [1e-6, 1e6]}, people__regulars=30,
                  people__regulars_per_need=4.0, shift__days=1)
    world = build_world(sc, 8)
    config = DecisionConfig(interruption_weight_s=0.0)
    res = run_policy(world, "nearest", SiteModel(), config, keep_decisions=True)
    by_need: dict = {}
    for d in res.decisions:
        by_need.setdefault(d.evaluation.need.request_id, []).append(d)
    twice = [ds for ds in by_need.values() if sum(d.action == "ask" for d in ds) == 2]
    assert len(twice) > 10 and all(len(ds) <= 3 for ds in by_need.values())
    for ds in twice:
        first, second = ds[0], ds[1]
        assert first.person_id != second.person_id
        row = next(r for r in second.rationale() if r["person_id"] == first.person_id)
        assert row["excluded"] == "reask_interval"
    assert res.declines == res.asks == sum(sum(d.action == "ask" for d in ds)
                                           for ds in by_need.values())
    once = run_policy(world, "nearest", SiteModel(), config,
                      rules=SessionRules(max_asks_per_need=1))
    assert once.asks == len([ds for ds in by_need.values() if ds[0].action == "ask"])
    with pytest.raises(CoreInputError, match="max_asks_per_need"):
        run_policy(world, "nearest", SiteModel(), config,
                   rules=SessionRules(max_asks_per_need=len(world.needs[0].u_help) + 1))


def test_later_ask_draws_do_not_change_the_world():
    """More draw pairs per need change nothing else.

    The same needs, people and first draws (common random numbers hold whatever the number of asks
    per need).
    """
    sc = scenario()
    two, five = build_world(sc, 4, ask_draws=2), build_world(sc, 4, ask_draws=5)
    assert [(n.time_s, n.seen, n.u_help[:2], n.u_silent[:2]) for n in two.needs] == \
        [(n.time_s, n.seen, n.u_help[:2], n.u_silent[:2]) for n in five.needs]
    assert all(len(n.u_help) == 5 and len(set(n.u_help)) == 5 for n in five.needs)


def test_t_interval_matches_scipy():
    x = [3.0, 5.0, 4.0, 9.0, 1.0]
    mean, half, n = t_interval(x)
    lo, hi = stats.t.interval(0.95, len(x) - 1, loc=np.mean(x), scale=stats.sem(x))
    assert n == 5 and mean == pytest.approx((lo + hi) / 2) and half == pytest.approx((hi - lo) / 2)


def test_gini_exact_values():
    assert gini([2, 2, 2, 2]) == 0.0
    assert gini([0, 0, 0, 4]) == pytest.approx(0.75)  # (n - 1)/n when one person has all
    assert gini([1, 2, 3]) == pytest.approx(2.0 / 9.0)  # sum|xi-xj| / (2 n^2 mean) = 8/36


@pytest.mark.parametrize("path,value,field", [
    ("needs__per_hour", -1.0, "needs.per_hour"),
    ("people__regulars", 2.5, "people.regulars"),
    ("ground_truth__model", "magic", "ground_truth.model"),
    ("people__willingness", {"beta": [0.0, 1.0]}, "people.willingness.beta[0]"),
    ("activities", [{"name": "x", "busyness": 1.5, "mean_duration_s": 1.0}],
     "activities[0].busyness"),
    ("shift__days", 0, "shift.days"),
])
def test_bad_scenario_names_the_field(path, value, field):
    with pytest.raises(ScenarioError, match=field.replace("[", r"\[").replace("]", r"\]")):
        scenario(**{path: value})


def test_missing_field_and_unknown_field_are_named():
    data = copy.deepcopy(BASE)
    del data["needs"]["kinds"]
    with pytest.raises(ScenarioError, match="needs.kinds: missing"):
        parse(data)
    data = copy.deepcopy(BASE)
    data["wheather"] = 1
    with pytest.raises(ScenarioError, match="wheather"):
        parse(data)


def test_shipped_scenarios_load_and_differ_in_kind():
    hosp = load("scenarios/hospital_night.yaml")
    lab = load("scenarios/research_lab_quiet.yaml")
    hub = load("scenarios/transit_concourse_busy.yaml")
    assert hosp.regulars == 40 and "with_patient" in hosp.never_ask_activities
    assert {a.name for a in hosp.activities} >= {"charting", "on_call", "walking_fast",
                                                 "with_patient"}
    assert hub.strangers_per_need > 2 * hub.regulars_per_need  # many strangers
    assert lab.strangers_per_need < 0.1 * lab.regulars_per_need  # few regulars, ~no strangers
    assert hub.needs_per_hour > 4 * lab.needs_per_hour  # very busy vs quiet
    assert hub.truth_model == "logistic"


def _simulate_with(tmp_path, params_text):
    import json as _json

    from helpaware_node import cli
    params = tmp_path / "site.yaml"
    params.write_text(params_text)
    out = tmp_path / "sim"
    scenario = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))),
                            "scenarios", "research_lab_quiet.yaml")
    code = cli.main(["simulate", scenario, "--seeds", "1",
                     "--policies", "ours", "--no-plots", "--quiet", "--out", str(out),
                     "--params", str(params)])
    doc = _json.loads((out / "results.json").read_text()) if code == 0 else None
    return code, doc


def test_simulate_uses_the_node_parameter_file(tmp_path):
    """A node parameter file drives the simulated decision.

    With the hourly cap at 0 the robot never asks; with the shipped defaults it does (same seed,
    same world).
    """
    code, capped = _simulate_with(tmp_path, "/**/helpaware_decider:\n  ros__parameters:\n"
                                            "    max_asks_per_hour: 0\n")
    assert code == 0 and capped["summary"]["ours"]["asks"]["mean"] == 0.0
    assert capped["params_file"].endswith("site.yaml")
    code, free = _simulate_with(tmp_path, "/**/helpaware_decider:\n  ros__parameters:\n"
                                          "    max_asks_per_hour: 100\n")
    assert code == 0 and free["summary"]["ours"]["asks"]["mean"] > 0.0


def test_simulate_refuses_a_bad_parameter_file_naming_it(tmp_path, capsys):
    code, _ = _simulate_with(tmp_path, "/**/helpaware_decider:\n  ros__parameters:\n"
                                       "    max_asks_per_hour: -3\n")
    err = capsys.readouterr().err
    assert code == 2 and "site.yaml" in err and "max_asks_per_hour" in err


def test_simulate_takes_max_asks_per_need_from_the_node_parameter_file(tmp_path):
    """The session's rules come from the same file.

    One ask per need asks less than three (same seed, same world; the later asks at a need are the
    asks again after a decline).
    """
    code, one = _simulate_with(tmp_path, "/**/helpaware_decider:\n  ros__parameters:\n"
                                         "    max_asks_per_need: 1\n")
    assert code == 0
    code, three = _simulate_with(tmp_path, "/**/helpaware_decider:\n  ros__parameters:\n"
                                           "    max_asks_per_need: 3\n")
    assert code == 0
    assert one["summary"]["ours"]["asks"]["mean"] < three["summary"]["ours"]["asks"]["mean"]
