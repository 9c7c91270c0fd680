"""The run loop: the help session the node runs, outcomes from the ground truth.

Each need goes through `session.HelpSession` exactly as the node's needs do: the view at the
need, the need opened, each ask answered from the world's draws, and a decline or no response
decides again (up to max_asks_per_need asks, the node's rule). Every decision is
core.policy.decide's.

Reward (robot-seconds saved against continuing alone), with the decision's own cost terms,
summed over the asks at a need: a help saves C_r - t_help, a declined (or unanswered) ask
costs t_ask, and every ask costs its interruption I (the evaluation's interruption_s for that
person). Continuing scores 0, so never asking loses exactly sum(C_r).
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Callable, Optional

import numpy as np

from ..core import DecisionConfig, HelpNeed, Result, SiteModel
from ..core.baselines import make_chooser
from ..core.context import ask_load
from ..core.model import CoreInputError
from ..core.person import DAY_S
from ..session import HelpSession, SessionRules, Step
from ..store.base import MemoryStore
from .world import SimNeed, World

SIM_ROBOT_ID = "sim"


@dataclass
class RunResult:
    policy: str
    seed: int
    times_s: np.ndarray          # time of each need
    reward_s: np.ndarray         # reward at each need
    continue_cost_s: np.ndarray  # C_r of each need
    asks: int = 0
    helps: int = 0
    declines: int = 0            # declined + no response
    no_responses: int = 0
    asks_by_person: dict = field(default_factory=dict)
    asks_by_person_day: dict = field(default_factory=dict)
    candidates_seen: set = field(default_factory=set)
    decisions: list = field(default_factory=list)   # every Decision, when asked to keep them
    decisions_made: int = 0      # decisions at all needs (a need decided again after a decline)


def site_config(world: World, config: DecisionConfig) -> DecisionConfig:
    """The site's never-ask activities are hard limits of the decision (a site rule)."""
    extra = tuple(a for a in world.scenario.never_ask_activities
                  if a not in config.protected_activities)
    if not extra:
        return config
    return dataclasses.replace(config, protected_activities=config.protected_activities + extra)


def open_sim_need(session: HelpSession, need: SimNeed) -> Step:
    """The view at the need (everyone else has left), then the need: the first decision."""
    t = need.time_s
    session.people_seen(need.seen, t, complete_view=True)
    return session.need_opened(HelpNeed(need.request_id, need.kind, t,
                                        continue_cost_s=need.continue_cost_s,
                                        help_time_s=need.help_time_s), t)


def run_policy(world: World, policy: str, model: SiteModel, config: DecisionConfig,
               keep_decisions: bool = False, progress: Optional[Callable[[int], None]] = None,
               rules: SessionRules = SessionRules()) -> RunResult:
    sc = world.scenario
    config = site_config(world, config)
    draws = min(len(n.u_help) for n in world.needs) if world.needs else rules.max_asks_per_need
    if rules.max_asks_per_need > draws:
        raise CoreInputError(f"max_asks_per_need: {rules.max_asks_per_need} is more than the "
                             f"{draws} outcome draws per need of this world (build_world "
                             f"ask_draws)")
    true_asks: dict[str, list[float]] = {}

    def true_p(ev) -> np.ndarray:
        return np.array([world.true_help_probability(
            c.person_id, float(ev.busyness[k]),
            ask_load(true_asks.get(c.person_id, ()), ev.now_s, sc.truth_ask_half_life_s))
            for k, c in enumerate(ev.candidates)])

    chooser = make_chooser(policy, config, seed=world.seed, true_p=true_p)
    session = HelpSession(MemoryStore(robot_id=SIM_ROBOT_ID), model, config, rules,
                          chooser=chooser, policy=policy)
    n = len(world.needs)
    res = RunResult(policy, world.seed, np.array([s.time_s for s in world.needs]), np.zeros(n),
                    np.array([s.continue_cost_s for s in world.needs]))
    for j, need in enumerate(world.needs):
        session.tick(need.time_s)
        step = open_sim_need(session, need)
        res.candidates_seen.update(s.person_id for s in need.seen)
        k = 0                                   # asks made at this need so far
        while step.decisions:
            decision = step.decisions[-1].decision
            res.decisions_made += 1
            if keep_decisions:
                res.decisions.append(decision)
            if decision.action != "ask":
                break
            result = _answer(world, decision, need, k, true_asks, res, j, config)
            k += 1
            step = session.outcome(need.request_id, decision.person_id, result, need.time_s)
        session.need_closed(need.request_id)
        if progress is not None:
            progress(1)
    return res


def _answer(world: World, decision, need: SimNeed, k: int, true_asks: dict,
            res: RunResult, j: int, config: DecisionConfig) -> Result:
    """The world's answer to the k-th ask at need j (its k-th draw pair), with the reward."""
    sc = world.scenario
    ev = decision.evaluation
    i = decision.person_index
    pid = decision.person_id
    past = true_asks.setdefault(pid, [])
    p = world.true_help_probability(pid, float(ev.busyness[i]),
                                    ask_load(past, need.time_s, sc.truth_ask_half_life_s))
    past.append(need.time_s)
    res.asks += 1
    res.asks_by_person[pid] = res.asks_by_person.get(pid, 0) + 1
    day_key = (pid, int(need.time_s // DAY_S))
    res.asks_by_person_day[day_key] = res.asks_by_person_day.get(day_key, 0) + 1
    interruption = float(ev.interruption_s[i])
    if need.u_help[k] < p:
        res.helps += 1
        res.reward_s[j] += ev.continue_cost_s - ev.help_time_s - interruption
        return Result.HELPED
    silent = need.u_silent[k] < sc.no_response_fraction
    res.declines += 1
    res.no_responses += int(silent)
    res.reward_s[j] += -config.ask_time_s - interruption
    return Result.NO_RESPONSE if silent else Result.DECLINED
