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

"""The simulator's oracles: true scores from the world's truth, its costs and its future.

`oracle_greedy` asks the best positive true advantage now: the true P(help) (true
willingness, true context, the true ask load), the world's continue cost, help time, t_ask
and interruption cost. It ignores what an ask leaves behind, so on a site with a long ask
memory a policy that counts that can beat it: it is a reference, not a ceiling.

`oracle` (the ceiling) subtracts the ask's lasting cost on the true model, by a rollout of
the greedy oracle (Bertsekas, Tsitsiklis and Wu, "Rollout algorithms for combinatorial
optimization", J. Heuristics 1997, reference from memory: a one-step look-ahead with a base
policy simulated after the step does at least as well as the base policy when the simulation
is exact). Over the
person's actual later encounters within ORACLE_HALF_LIVES true ask-memory half-lives (the
world knows when they will be near the robot again, which is more than their rate), the
greedy oracle is played out twice, with this ask and without it: at each encounter it asks
the person when their true advantage there is positive, the best of everyone in view then,
and the hard limits (re-ask interval, daily cap) allow it, and that ask adds to their load in
turn. The lasting cost is the difference of the two expected totals. Simplifications: the
other people in view at those encounters keep their true load as of now, each encounter's
value is an expectation (a help there does not end anything), and the robot's own hourly cap
is not played out.
"""
from __future__ import annotations

from typing import Optional

import numpy as np

from .world import SeenPerson, SimNeed, World
from ..core.context import ask_load
from ..core.model import DecisionConfig
from ..core.person import DAY_S

ORACLE_HALF_LIVES = 7.0    # later encounters counted this far ahead (an ask then adds < 1 %)


class TrueWorld:
    """The truth behind one run: the asks people really received, and true scores."""

    def __init__(self, world: World, config: DecisionConfig):
        self.world = world
        self.sc = world.scenario
        self.config = config
        self.true_asks: dict[str, list[float]] = {}
        self.need_index = 0          # the need being decided (the run loop sets it)

    # -- the truth at one moment
    def load(self, pid: str, t: float) -> float:
        return ask_load(self.true_asks.get(pid, ()), t, self.sc.truth_ask_half_life_s)

    def advantage(self, pid: str, busyness: float, load: float, need: SimNeed) -> float:
        """Return True A = p (C - t_help) - (1 - p) t_ask - I, with the world's costs."""
        p = self.world.true_help_probability(pid, busyness, load)
        costs = self.sc.costs
        return (p * (need.continue_cost_s - need.help_time_s) - (1.0 - p) * costs.ask_time_s
                - costs.interruption_s(busyness, load))

    def askable(self, person: SeenPerson) -> bool:
        c = self.config
        return (person.activity not in c.protected_activities
                and person.busyness < c.busyness_limit and person.distance_m <= c.max_distance_m)

    def within_limits(self, pid: str, t: float, extra: Optional[float] = None) -> bool:
        """Re-ask interval and daily cap at time t, with one more ask at `extra` if given."""
        times = list(self.true_asks.get(pid, ()))
        if extra is not None:
            times.append(extra)
        if any(t - s < self.config.min_reask_interval_s for s in times):
            return False
        return sum(1 for s in times if t - s < DAY_S) < self.config.max_asks_per_person_per_day

    # -- scores for the choosers
    def greedy_scores(self, ev) -> np.ndarray:
        need = self.world.needs[self.need_index]
        return np.array([self.advantage(c.person_id, float(ev.busyness[k]),
                                        self.load(c.person_id, ev.now_s), need)
                         for k, c in enumerate(ev.candidates)])

    def lookahead_scores(self, ev) -> np.ndarray:
        greedy = self.greedy_scores(ev)
        return np.array([greedy[k] - self.lasting_cost(c.person_id, ev.now_s)
                         if ev.exclusions[k] is None else greedy[k]
                         for k, c in enumerate(ev.candidates)])

    def lasting_cost(self, pid: str, now_s: float) -> float:
        """Greedy rollout over the person's later encounters without and with an ask now.

        The expected true advantage it loses (module doc).
        """
        h = self.sc.truth_ask_half_life_s
        horizon = ORACLE_HALF_LIVES * h
        needs = self.world.needs
        later = []      # (need, the person there, best other advantage there)
        for j in self.world.encounters.get(pid, ()):
            if j <= self.need_index:
                continue
            need = needs[j]
            if need.time_s - now_s > horizon:
                break
            me = next(s for s in need.seen if s.person_id == pid)
            if not self.askable(me):
                continue
            other = 0.0
            for s in need.seen:
                if s.person_id != pid and self.askable(s) and self.within_limits(
                        s.person_id, need.time_s):
                    other = max(other, self.advantage(s.person_id, s.busyness,
                                                      self.load(s.person_id, need.time_s), need))
            later.append((need, me, other))
        if not later:
            return 0.0
        past = tuple(self.true_asks.get(pid, ()))
        return self._rollout(pid, later, past, h) - self._rollout(pid, later, past + (now_s,), h)

    def _rollout(self, pid: str, later, asks: tuple, h: float) -> float:
        """Return the greedy oracle's expected advantage over `later`, from this ask history."""
        times = list(asks)
        total = 0.0
        cfg = self.config
        for need, me, other in later:
            t = need.time_s
            value = other
            allowed = (not any(t - s < cfg.min_reask_interval_s for s in times)
                       and sum(1 for s in times if t - s < DAY_S)
                       < cfg.max_asks_per_person_per_day)
            if allowed:
                mine = self.advantage(pid, me.busyness, ask_load(times, t, h), need)
                if mine > other and mine > 0.0:
                    value = mine
                    times.append(t)
            total += max(value, 0.0)
        return total
