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

"""Metrics of one run and their 95 % t intervals over seeds.

Evenness of asks: the Gini coefficient of asks over every person who was ever a candidate
(0 = every such person asked equally often, towards 1 = all asks on one person).
"""
from __future__ import annotations

import math

import numpy as np
from scipy import stats

from .run import RunResult

METRICS = ("reward_s", "reward_second_half_s", "interruption_s", "asks", "helps", "declines",
           "asks_per_help", "max_asks_person_day", "gini_asks")


def gini(values) -> float:
    """Gini coefficient: mean absolute difference over all pairs / (2 * mean); 0 when all zero."""
    x = np.sort(np.asarray(values, dtype=float))
    n = x.size
    if n == 0 or x.sum() == 0:
        return 0.0
    ranks = np.arange(1, n + 1)
    return float((2.0 * np.sum(ranks * x) / (n * x.sum())) - (n + 1.0) / n)


def run_metrics(res: RunResult) -> dict:
    people = sorted(res.candidates_seen)
    asks = [res.asks_by_person.get(p, 0) for p in people]
    return {
        "reward_s": float(res.reward_s.sum()),
        "reward_second_half_s": res.second_half_reward_s,
        "interruption_s": float(res.interruption_s),
        "lost_s": float(res.continue_cost_s.sum() - res.reward_s.sum()),
        "needs": int(res.reward_s.size),
        "asks": res.asks, "helps": res.helps, "declines": res.declines,
        "no_responses": res.no_responses,
        "asks_per_help": res.asks / res.helps if res.helps else math.nan,
        "max_asks_person_day": max(res.asks_by_person_day.values(), default=0),
        "gini_asks": gini(asks),
    }


def t_interval(values, level: float = 0.95) -> tuple[float, float, int]:
    """Mean and half-width of the t interval (scipy.stats.t), ignoring NaN runs."""
    x = np.asarray([v for v in values if not math.isnan(v)], dtype=float)
    if x.size == 0:
        return math.nan, math.nan, 0
    if x.size == 1:
        return float(x[0]), math.nan, 1
    half = stats.t.ppf(0.5 + level / 2.0, x.size - 1) * x.std(ddof=1) / math.sqrt(x.size)
    return float(x.mean()), float(half), int(x.size)


def paired_difference(xs, ys, ratio: float = 1.0, level: float = 0.95) -> dict:
    """Mean and t half-width over seeds of x_s.

    Ratio * y_s (the same seed's runs paired), and the verdict on x >= ratio * y: "met" when the
    whole interval is >= 0, "missed" when it is all below 0, "undecided" when it holds 0.
    """
    d = [x - ratio * y for x, y in zip(xs, ys)]
    mean, half, n = t_interval(d, level)
    if n < 2 or math.isnan(half):
        verdict = "undecided"
    elif mean - half >= 0.0:
        verdict = "met"
    elif mean + half < 0.0:
        verdict = "missed"
    else:
        verdict = "undecided"
    return {"mean": mean, "ci95": half, "n": n, "verdict": verdict, "ratio": ratio}


def summarise(per_seed: list[dict]) -> dict:
    out = {}
    for key in METRICS + ("lost_s", "no_responses"):
        mean, half, n = t_interval([m[key] for m in per_seed])
        out[key] = {"mean": mean, "ci95": half, "n": n}
    return out
