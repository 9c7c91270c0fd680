"""The run loop: every decision goes through core.policy.decide, outcomes from the ground truth.

Reward (robot-seconds saved against continuing alone), with the decision's own cost terms:
a help saves C_r - t_help, a declined (or unanswered) ask costs t_ask, and every ask costs its
interruption I (the evaluation's interruption_s for that person). Continuing scores 0, so the
robot-seconds lost at a need are C_r - reward and never asking loses exactly sum(C_r).
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Callable, Optional

import numpy as np

from ..core import (DecisionConfig, HelpNeed, OutcomeEvent, PersonRecord, Result, SiteModel,
                    candidate_from_record, decide, keep_recent_asks, note_ask, note_candidate,
                    note_outcome)
from ..core.baselines import make_chooser
from ..core.context import ask_load
from ..core.person import DAY_S
from ..core.policy import HOUR_S, Decision
from .world import SimNeed, World


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


def site_config(world: World, config: DecisionConfig) -> DecisionConfig:
    """The site's never-ask activities are hard limits of the decision (a site rule)."""
    extra = tuple(a for a in world.scenario.never_ask_activities
                  if a not in config.protected_activities)
    if not extra:
        return config
    return dataclasses.replace(config, protected_activities=config.protected_activities + extra)


class SimRobot:
    """What one robot remembers while a policy runs: person records and its own asks."""

    def __init__(self, model: SiteModel, config: DecisionConfig):
        self.model = model
        self.config = config
        self.records: dict[str, PersonRecord] = {}
        self.robot_asks: list[float] = []

    def decide(self, need: SimNeed, chooser, policy: str) -> Decision:
        """Build candidates from records exactly as the node does, and call core.decide."""
        t = need.time_s
        model = self.model
        cands = []
        for s in need.seen:
            rec = self.records.get(s.person_id)
            if rec is None:
                rec = self.records[s.person_id] = PersonRecord.new(model)
            cands.append(candidate_from_record(s.person_id, rec, t, model, s.distance_m, t,
                                               s.busyness, s.activity))
        self.robot_asks = list(keep_recent_asks(self.robot_asks, t, HOUR_S,
                                                self.config.max_asks_per_hour))
        help_need = HelpNeed(need.request_id, need.kind, t, continue_cost_s=need.continue_cost_s,
                             help_time_s=need.help_time_s)
        decision = decide(help_need, cands, t, self.robot_asks, model, self.config, chooser, policy)
        for s in need.seen:
            self.records[s.person_id] = note_candidate(self.records[s.person_id], t)
        return decision

    def learn(self, decision: Decision, result: Result, event_id: str) -> None:
        ev = decision.evaluation
        i = decision.person_index
        pid = decision.person_id
        t = ev.now_s
        event = OutcomeEvent(t, result, float(ev.busyness[i]), float(ev.ask_load[i]), event_id)
        self.records[pid] = note_outcome(note_ask(self.records[pid], t, self.model), event,
                                         self.model)
        self.robot_asks.append(t)


def run_policy(world: World, policy: str, model: SiteModel, config: DecisionConfig,
               keep_decisions: bool = False, progress: Optional[Callable[[int], None]] = None
               ) -> RunResult:
    sc = world.scenario
    config = site_config(world, config)
    true_asks: dict[str, list[float]] = {}

    def true_p(ev) -> np.ndarray:
        return np.array([world.true_help_probability(
            c.person_id, float(ev.busyness[k]),
            ask_load(true_asks.get(c.person_id, ()), ev.now_s, sc.truth_ask_half_life_s))
            for k, c in enumerate(ev.candidates)])

    chooser = make_chooser(policy, config, seed=world.seed, true_p=true_p)
    robot = SimRobot(model, config)
    n = len(world.needs)
    res = RunResult(policy, world.seed, np.array([s.time_s for s in world.needs]), np.zeros(n),
                    np.array([s.continue_cost_s for s in world.needs]))
    for j, need in enumerate(world.needs):
        decision = robot.decide(need, chooser, policy)
        res.candidates_seen.update(s.person_id for s in need.seen)
        if keep_decisions:
            res.decisions.append(decision)
        if progress is not None:
            progress(1)
        if decision.action != "ask":
            continue
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
        if need.u_help < p:
            result = Result.HELPED
            res.helps += 1
            res.reward_s[j] = ev.continue_cost_s - ev.help_time_s - interruption
        else:
            silent = need.u_silent < sc.no_response_fraction
            result = Result.NO_RESPONSE if silent else Result.DECLINED
            res.declines += 1
            res.no_responses += int(silent)
            res.reward_s[j] = -config.ask_time_s - interruption
        robot.learn(decision, result, f"sim/{j:06d}")
    return res
