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

"""Outcome tables drawn from the fitted model itself (for tests and the benchmark).

Generative story (see site_likelihood): noticed with probability nu = tau + q (1 - tau); a
noticed person helps with probability w c, otherwise declines aloud with probability
s = tau / nu, else stays silent; an unnoticed ask gets no response.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .data import ask_ages_from_times, DECLINED, from_arrays, HELPED, NO_RESPONSE, OutcomeData
from .site_likelihood import SiteParams


def simulate(params: SiteParams, n_people: int, asks_per_person: float, seed: int,
             load_scale: float = 1.0) -> OutcomeData:
    rng = np.random.default_rng(seed)
    counts = 1 + rng.poisson(max(asks_per_person - 1.0, 0.0), size=n_people)
    w = rng.beta(params.prior_a, params.prior_b, size=n_people)
    person = np.repeat(np.arange(n_people), counts)
    n = person.size
    x = rng.beta(1.2, 2.0, size=n)
    f = load_scale * rng.exponential(0.6, size=n) * (rng.random(n) < 0.5)
    c = np.exp(-(params.k_busy * x + params.k_load * f))
    result = draw_results(rng, params, w[person] * c)
    keys = [f"p{i:06d}" for i in range(n_people)]
    return from_arrays([keys[i] for i in person], x, f, result, keys)


def draw_results(rng: np.random.Generator, params: SiteParams, wc: np.ndarray) -> np.ndarray:
    """Draw results by the module doc's generative story: help chance w c when noticed."""
    n = wc.size
    tau, q = params.decline_aloud, params.notice_probability
    nu = tau + q * (1.0 - tau)
    noticed = rng.random(n) < nu
    helps = noticed & (rng.random(n) < wc)
    aloud = noticed & ~helps & (rng.random(n) < tau / nu)
    return np.where(helps, HELPED, np.where(aloud, DECLINED, NO_RESPONSE))


@dataclass(frozen=True)
class SimulatedAsks:
    """A simulated site with ask times: every ask (answered or not) and the answered ones."""

    data: OutcomeData              # answered asks, with prior_asks (all asks before each)
    person_keys: tuple[str, ...]
    ask_person: np.ndarray         # index into person_keys, per ask
    ask_time_s: np.ndarray
    answered: np.ndarray           # bool per ask: an outcome was recorded
    result: np.ndarray             # per ask (HELPED / DECLINED / NO_RESPONSE) if answered
    busyness: np.ndarray           # per ask
    robot_load: np.ndarray         # per ask: the load the robot computed with its half-life


def simulate_with_asks(params: SiteParams, n_people: int, asks_per_person: float, seed: int,
                       gap_range: tuple[float, float] = (0.05, 20.0),
                       unanswered: float = 0.0, robot_half_life_s: float = 1800.0
                       ) -> SimulatedAsks:
    """Outcomes whose ask load comes from ask times under params.ask_memory_half_life_s (h).

    Each person's asks follow one another after gaps log-uniform in h * gap_range (so the
    data see loads from near 1 per earlier ask down to near 0); a share `unanswered` of asks
    get no outcome (expired) but still weigh on the person. The load column of the returned
    data is what a robot with `robot_half_life_s` would have computed (a wrong half-life, to
    show it is not used when the half-life is fitted).
    """
    assert params.ask_memory_half_life_s is not None, "simulate with a half-life"
    h = float(params.ask_memory_half_life_s)
    rng = np.random.default_rng(seed)
    counts = 1 + rng.poisson(max(asks_per_person - 1.0, 0.0), size=n_people)
    w = rng.beta(params.prior_a, params.prior_b, size=n_people)
    person = np.repeat(np.arange(n_people), counts)
    n = person.size
    lo, hi = np.log(gap_range[0] * h), np.log(gap_range[1] * h)
    gaps = np.exp(rng.uniform(lo, hi, size=n))
    first = np.concatenate([[0], np.cumsum(counts)[:-1]])
    gaps[first] = rng.uniform(0.0, 86400.0, size=n_people)      # each person's first ask
    t = np.cumsum(gaps)       # people's asks overlap in time: each history starts in day one
    t = t - np.repeat(np.concatenate([[0.0], t[np.cumsum(counts)[:-1] - 1]]), counts)
    true_load, robot_load = np.zeros(n), np.zeros(n)
    for i, (s, c) in enumerate(zip(first, counts)):          # per person: earlier asks only
        ti = t[s:s + c]
        age = ti[:, None] - ti[None, :]
        earlier = age > 0
        true_load[s:s + c] = np.sum(np.where(earlier, np.exp2(-np.where(earlier, age, 0) / h),
                                             0.0), axis=1)
        robot_load[s:s + c] = np.sum(np.where(earlier, np.exp2(
            -np.where(earlier, age, 0) / robot_half_life_s), 0.0), axis=1)
    x = rng.beta(1.2, 2.0, size=n)
    c_ = np.exp(-(params.k_busy * x + params.k_load * true_load))
    result = draw_results(rng, params, w[person] * c_)
    answered = rng.random(n) >= unanswered
    keys = tuple(f"p{i:06d}" for i in range(n_people))
    rows = np.flatnonzero(answered)
    ages = ask_ages_from_times(person[rows], t[rows], person, t)
    data = from_arrays([keys[i] for i in person[rows]], x[rows], robot_load[rows], result[rows],
                       list(keys), prior_asks=ages)
    return SimulatedAsks(data, keys, person, t, answered, result, x, robot_load)
