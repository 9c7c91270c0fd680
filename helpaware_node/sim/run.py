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

"""The run loop: the help session the node runs, outcomes and reward from the world.

Each need goes through `session.HelpSession` exactly as the node's needs do: the view at the
need, the need opened, each ask answered from the world's draws, and a decline or no response
decides again (up to max_asks_per_need asks, the node's rule). Every decision is
core.policy.decide's.

Reward (robot-seconds saved against continuing alone) is the world's, never the robot's: it
uses the scenario's costs (sim.scenario.WorldCosts) and the true ask load, whatever the robot
believes, so runs with different robot parameters are comparable. Summed over the asks at a
need: a help saves C_r - t_help, an ask not helped costs the world's t_ask, and every ask costs
the world's interruption I = weight (1 + busy_cost x + repeat_cost f_true), which the run also
totals on its own (`interruption_s`). Continuing scores 0, so never asking loses exactly
sum(C_r).

Policies: the core's choosers (core.baselines) and three that need the world: `informed`
(ours given the site's true constants, sim.truth), `oracle` (true advantage minus the true
lasting cost of the ask, sim.oracle) and `oracle_greedy` (the true advantage now only).

Site learning: `learner` is anything with `due(new_outcomes, now_s)` and
`refit(outcomes, asks, now_s)` returning an object with `.accepted`, `.model` and, optionally,
`.applied` (the interface of helpaware_node.fit.online.SiteLearner, which records its own
result when refit is called). After each need the run counts the outcomes stored since the
last refit; when the learner says it is due, it refits on every outcome and ask event the run
has stored, and a refit that is applied (`.applied`, or `.accepted` where a learner has no
`.applied`: a proposal that is accepted but not applied changes nothing) has its model put in
force with session.set_parameters (costs, limits and rules stay).
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any, Callable, Optional

import numpy as np

from .oracle import TrueWorld
from .truth import informed_config, true_site_model
from .world import SimNeed, World
from ..core import DecisionConfig, HelpNeed, Result, SiteModel
from ..core.baselines import make_chooser
from ..core.model import CoreInputError
from ..core.person import DAY_S
from ..session import HelpSession, SessionRules, Step
from ..store.base import AskEvent, MemoryStore, StoredEvent

SIM_ROBOT_ID = "sim"
# every policy the simulator runs, in table order
SIM_POLICY_NAMES = ("ours", "informed", "never", "nearest", "busyness", "willingness",
                    "thompson", "oracle", "oracle_greedy")


@dataclass
class RunResult:
    policy: str
    seed: int
    times_s: np.ndarray          # time of each need
    reward_s: np.ndarray         # reward at each need (the world's)
    continue_cost_s: np.ndarray  # C_r of each need
    duration_s: float = 0.0      # the run's length (days of the scenario)
    asks: int = 0
    helps: int = 0
    declines: int = 0            # declined + no response
    no_responses: int = 0
    interruption_s: float = 0.0  # interruption cost the world bore, summed over every ask
    asks_by_person: dict = field(default_factory=dict)
    asks_by_person_day: dict = field(default_factory=dict)
    candidates_seen: set = field(default_factory=set)
    decisions: list = field(default_factory=list)   # every Decision, when asked to keep them
    decisions_made: int = 0      # decisions at all needs (a need decided again after a decline)
    refits: list = field(default_factory=list)      # (time_s, applied, model) per refit

    @property
    def second_half_reward_s(self) -> float:
        return float(self.reward_s[self.times_s >= self.duration_s / 2.0].sum())


def site_config(world: World, config: DecisionConfig) -> DecisionConfig:
    """Return the site's never-ask activities are hard limits of the decision (a site rule)."""
    extra = tuple(a for a in world.scenario.never_ask_activities
                  if a not in config.protected_activities)
    if not extra:
        return config
    return dataclasses.replace(config, protected_activities=config.protected_activities + extra)


def open_sim_need(session: HelpSession, need: SimNeed) -> Step:
    """Return the view at the need (everyone else has left), then the need: the first decision."""
    t = need.time_s
    session.people_seen(need.seen, t, complete_view=True)
    return session.need_opened(HelpNeed(need.request_id, need.kind, t,
                                        continue_cost_s=need.continue_cost_s,
                                        help_time_s=need.help_time_s), t)


def robot_settings(world: World, policy: str, model: SiteModel,
                   config: DecisionConfig) -> tuple[SiteModel, DecisionConfig]:
    """Return the robot's model and settings for a policy: `informed` is told the site's truth."""
    if policy == "informed":
        return true_site_model(world.scenario, model), informed_config(world.scenario, config)
    return model, config


def run_policy(world: World, policy: str, model: SiteModel, config: DecisionConfig,
               keep_decisions: bool = False, progress: Optional[Callable[[int], None]] = None,
               rules: SessionRules = SessionRules(), learner: Any = None,
               label: Optional[str] = None) -> RunResult:
    """One policy on one world.

    `learner`: site learning (module doc); `label`: the name the result carries (default: the
    policy's).
    """
    if policy not in SIM_POLICY_NAMES:
        raise ValueError(f"policy: {policy!r} is not one of {', '.join(SIM_POLICY_NAMES)}")
    model, config = robot_settings(world, policy, model, config)
    config = site_config(world, config)
    draws = min(len(n.u_help) for n in world.needs) if world.needs else rules.max_asks_per_need
    if rules.max_asks_per_need > draws:
        raise CoreInputError(f"max_asks_per_need: {rules.max_asks_per_need} is more than the "
                             f"{draws} outcome draws per need of this world (build_world "
                             f"ask_draws)")
    truth = TrueWorld(world, config)
    score = {"oracle": truth.lookahead_scores, "oracle_greedy": truth.greedy_scores}.get(policy)
    core_name = {"informed": "ours", "oracle_greedy": "oracle"}.get(policy, policy)
    chooser = make_chooser(core_name, config, seed=world.seed, true_score=score)
    session = HelpSession(MemoryStore(robot_id=SIM_ROBOT_ID), model, config, rules,
                          chooser=chooser, policy=policy)
    n = len(world.needs)
    res = RunResult(label or policy, world.seed, np.array([s.time_s for s in world.needs]),
                    np.zeros(n), np.array([s.continue_cost_s for s in world.needs]),
                    duration_s=world.duration_s)
    outcomes: list[StoredEvent] = []
    asks: list[AskEvent] = []
    since_refit = 0
    for j, need in enumerate(world.needs):
        truth.need_index = j
        steps = [session.tick(need.time_s)]
        step = open_sim_need(session, need)
        steps.append(step)
        res.candidates_seen.update(s.person_id for s in need.seen)
        k = 0                                   # asks made at this need so far
        while step.decisions:
            decision = step.decisions[-1].decision
            res.decisions_made += 1
            if keep_decisions:
                res.decisions.append(decision)
            if decision.action != "ask":
                break
            result = _answer(world, truth, decision, need, k, res, j)
            k += 1
            assert decision.person_id is not None   # an ask names its person
            step = session.outcome(need.request_id, decision.person_id, result, need.time_s)
            steps.append(step)
        session.need_closed(need.request_id)
        for st in steps:
            for event in st.share:
                if isinstance(event, StoredEvent):
                    outcomes.append(event)
                    since_refit += 1
                elif isinstance(event, AskEvent):
                    asks.append(event)
        if learner is not None and learner.due(since_refit, need.time_s):
            since_refit = 0
            refit = learner.refit(tuple(outcomes), tuple(asks), need.time_s)
            applied = bool(getattr(refit, "applied", refit.accepted))
            res.refits.append((need.time_s, applied, refit.model))
            if applied:
                session.set_parameters(refit.model, session.config, session.rules)
        if progress is not None:
            progress(1)
    return res


def _answer(world: World, truth: TrueWorld, decision, need: SimNeed, k: int,
            res: RunResult, j: int) -> Result:
    """Return the world's answer to the k-th ask at need j, with the world's reward.

    The world's answer to the k-th ask at need j (its k-th draw pair), with the world's reward: its
    costs, the true ask load.
    """
    sc = world.scenario
    pid = decision.person_id
    busyness = next(s.busyness for s in need.seen if s.person_id == pid)
    true_load = truth.load(pid, need.time_s)
    p = world.true_help_probability(pid, busyness, true_load)
    interruption = sc.costs.interruption_s(busyness, true_load)
    truth.true_asks.setdefault(pid, []).append(need.time_s)
    res.asks += 1
    res.interruption_s += interruption
    res.asks_by_person[pid] = res.asks_by_person.get(pid, 0) + 1
    day_key = (pid, int(need.time_s // DAY_S))
    res.asks_by_person_day[day_key] = res.asks_by_person_day.get(day_key, 0) + 1
    if need.u_help[k] < p:
        res.helps += 1
        res.reward_s[j] += need.continue_cost_s - need.help_time_s - interruption
        return Result.HELPED
    silent = need.u_silent[k] < sc.no_response_fraction
    res.declines += 1
    res.no_responses += int(silent)
    res.reward_s[j] += -sc.costs.ask_time_s - interruption
    return Result.NO_RESPONSE if silent else Result.DECLINED
