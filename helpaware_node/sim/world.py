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

"""One simulated site for one seed: people, busyness schedules, encounters, ground truth.

Everything here is drawn before any policy runs and does not depend on the policy, so all
policies face the same needs, the same people and the same random outcome draws (common
random numbers): differences between policies are differences of decisions, not of luck.
Each need carries one pair of outcome draws per ask the robot may make there (the first ask,
and the asks again after a decline): the k-th ask at a need uses the k-th pair, whoever is
asked. The first pair comes from the world's stream as before; the later pairs come from a
stream of their own, one column per ask, so how many pairs are drawn changes no other draw.
"""
from __future__ import annotations

import bisect
import dataclasses
from dataclasses import dataclass
import math
import random

import numpy as np

from .scenario import Scenario
from ..core.person import DAY_S

ASK_DRAWS_PER_NEED = 5     # outcome draw pairs per need: asks at one need the world can answer


@dataclass(frozen=True)
class SeenPerson:
    person_id: str
    distance_m: float
    busyness: float
    activity: str


@dataclass(frozen=True)
class SimNeed:
    request_id: str
    time_s: float
    kind: str
    continue_cost_s: float
    help_time_s: float
    seen: tuple[SeenPerson, ...]
    u_help: tuple[float, ...]    # per ask k: helped when u_help[k] < true p
    u_silent: tuple[float, ...]  # per ask k: no response (below the fraction) or declined


@dataclass
class World:
    scenario: Scenario
    seed: int
    needs: list[SimNeed]
    willingness: dict[str, float]   # true willingness (help probability when free, unasked)
    # need indices where each person is in view, in time order (no draws: derived from needs)
    encounters: dict[str, list[int]] = dataclasses.field(default_factory=dict)

    @property
    def duration_s(self) -> float:
        return self.scenario.days * DAY_S

    def true_help_probability(self, person_id: str, busyness: float, ask_load: float) -> float:
        """P(help | person, busyness, true ask load) under the scenario's ground truth."""
        sc = self.scenario
        w = self.willingness[person_id]
        if sc.truth_model == "ours":
            return w * math.exp(-(sc.truth_k_busy * busyness + sc.truth_k_load * ask_load))
        if w <= 0.0:
            return 0.0
        if w >= 1.0:
            return 1.0
        z = math.log(w / (1.0 - w)) - sc.truth_k_busy * busyness - sc.truth_k_load * ask_load
        return 1.0 / (1.0 + math.exp(-z))


def _draw_mixture(rng: np.random.Generator, mixture, size: int) -> np.ndarray:
    weights = np.array([m[0] for m in mixture], dtype=float)
    comp = rng.choice(len(mixture), size=size, p=weights / weights.sum())
    a = np.array([m[1] for m in mixture])[comp]
    b = np.array([m[2] for m in mixture])[comp]
    return rng.beta(a, b)


def _willingness(rng, sc: Scenario, mixture, size: int) -> np.ndarray:
    w = _draw_mixture(rng, mixture, size)
    if sc.truth_model == "logistic" and size:
        # random-intercept logistic truth: logit intercept = logit(mixture mean) + sd * z
        mean = float(sum(m[0] * m[1] / (m[1] + m[2]) for m in mixture)
                     / sum(m[0] for m in mixture))
        mean = min(max(mean, 1e-6), 1 - 1e-6)
        z = math.log(mean / (1 - mean)) + sc.truth_logit_sd * rng.standard_normal(size)
        w = 1.0 / (1.0 + np.exp(-z))
    return w


def _pick(cumulative: np.ndarray, rng: np.random.Generator) -> int:
    """One index drawn with the probabilities whose running sum is `cumulative`."""
    return min(int(np.searchsorted(cumulative, rng.random(), side="right")), cumulative.size - 1)


def _weighted_sample(weights: np.ndarray, k: int, rng: np.random.Generator) -> np.ndarray:
    """Draw k distinct indices with probability proportional to weight.

    k distinct indices, drawn one after another with probability proportional to weight
    (exponential-race keys: the k smallest E_i / w_i), in draw order.
    """
    keys = rng.exponential(size=weights.size) / weights
    top = np.argpartition(keys, k - 1)[:k] if k < weights.size else np.arange(weights.size)
    return top[np.argsort(keys[top], kind="stable")]


class _Schedules:
    """Each regular moves through activities (weights, exponential durations) over a shift."""

    def __init__(self, sc: Scenario, rng: random.Random, n: int):
        self.sc = sc
        self.rng = rng   # plain Python generator: thousands of scalar draws, fast
        w = np.array([a.weight for a in sc.activities], dtype=float)
        self.cum = np.cumsum(w / w.sum()).tolist()
        self.end = [-math.inf] * n
        self.act = [0] * n
        self.busy = [0.0] * n

    def draw(self) -> tuple[int, float, float]:
        k = min(bisect.bisect_right(self.cum, self.rng.random()), len(self.cum) - 1)
        a = self.sc.activities[k]
        busy = a.busyness_low + (a.busyness_high - a.busyness_low) * self.rng.random()
        return k, busy, self.rng.expovariate(1.0 / a.mean_duration_s)

    def start_day(self, day_start_s: float) -> None:
        self.end = [day_start_s] * len(self.end)  # everyone starts the shift with a fresh activity

    def at(self, i: int, t: float) -> tuple[str, float]:
        while self.end[i] <= t:
            k, busy, dur = self.draw()
            self.act[i], self.busy[i] = k, busy
            self.end[i] += dur
        return self.sc.activities[self.act[i]].name, float(self.busy[i])


def _later_ask_draws(seed: int, n: int, draws: int) -> np.ndarray:
    """(n, draws - 1, 2) uniforms for the asks after the first; column k from its own stream."""
    cols = [np.random.default_rng([seed, 0xA5C, k]).random((n, 2)) for k in range(1, draws)]
    return np.stack(cols, axis=1) if cols else np.empty((n, 0, 2))


def build_world(sc: Scenario, seed: int, ask_draws: int = ASK_DRAWS_PER_NEED) -> World:
    if ask_draws < 1:
        raise ValueError(f"ask_draws: {ask_draws} must be >= 1")
    rng = np.random.default_rng([seed, 0x5151])
    n = sc.regulars
    ids = [f"{sc.name}-r{i:03d}" for i in range(n)]
    will = dict(zip(ids, _willingness(rng, sc, sc.willingness, n).tolist()))
    around = rng.gamma(sc.encounter_spread, 1.0 / sc.encounter_spread,
                       size=n) if n else np.empty(0)
    sched = _Schedules(sc, random.Random(int(rng.integers(2**63))), n)
    kind_w = np.array([k.weight for k in sc.kinds], dtype=float)
    kind_cum = np.cumsum(kind_w / kind_w.sum())
    needs: list[SimNeed] = []
    stranger_count = 0
    for day in range(sc.days):
        start = day * DAY_S
        sched.start_day(start)
        count = int(rng.poisson(sc.needs_per_hour * sc.hours_per_day))
        times = np.sort(start + rng.random(count) * sc.hours_per_day * 3600.0)
        for t in times.tolist():
            kind = sc.kinds[_pick(kind_cum, rng)]
            seen = []
            k_reg = min(int(rng.poisson(sc.regulars_per_need)), n)
            if k_reg:
                for i in _weighted_sample(around, k_reg, rng).tolist():
                    act, busy = sched.at(i, t)
                    seen.append(SeenPerson(ids[i], float(rng.uniform(0.5, sc.max_distance_m)),
                                           busy, act))
            for _ in range(int(rng.poisson(sc.strangers_per_need))):
                pid = f"{sc.name}-s{stranger_count:06d}"
                stranger_count += 1
                will[pid] = float(_willingness(rng, sc, sc.stranger_willingness, 1)[0])
                k, busy, _ = sched.draw()
                seen.append(SeenPerson(pid, float(rng.uniform(0.5, sc.max_distance_m)), busy,
                                       sc.activities[k].name))
            needs.append(SimNeed(f"n{len(needs):06d}", t, kind.kind, kind.continue_cost_s,
                                 kind.help_time_s, tuple(seen), (float(rng.random()),),
                                 (float(rng.random()),)))
    later = _later_ask_draws(seed, len(needs), ask_draws).tolist()
    needs = [dataclasses.replace(nd, u_help=nd.u_help + tuple(p[0] for p in later[j]),
                                 u_silent=nd.u_silent + tuple(p[1] for p in later[j]))
             for j, nd in enumerate(needs)]
    encounters: dict[str, list[int]] = {}
    for j, nd in enumerate(needs):
        for person in nd.seen:
            encounters.setdefault(person.person_id, []).append(j)
    return World(sc, seed, needs, will, encounters)
