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

"""The parameter file's constants as `weight` pseudo-outcomes: the shrinkage of an online refit.

The penalty is the expected log-likelihood of `weight` outcomes drawn from the parameter
file's own model, on a fixed reference design in two halves:

    penalty(theta) = sum over pseudo-people i of  weight_i * log P_theta(y_i | design_i)
    weight_i = (outcomes of that half / asks per pseudo-person) * P_file(y_i | design_i) / designs

* regulars (half of `weight`): pseudo-people asked REGULAR_ASKS times in one context (busyness
  REGULAR_BUSYNESS, no earlier asks), one per count of helps, declines and no-responses,
  P_file the multinomial probability of that count.  Repeated asks of one person are what
  carry the spread of willingness across people (a0 + b0); pairs alone carry very little.
* contexts (the other half): pseudo-people asked twice, at busyness x1 with no earlier ask,
  then at x2 an interval g after the first (the second ask's load is 2^(-g / h)), x1, x2 in
  BUSYNESS_LEVELS, g in GAP_FACTORS times the file's half-life, each of the nine pairs of
  results: k_busy, k_load, the half-life and notice_probability.

P_file is the site model's own probability with willingness integrated out (exact: a
polynomial in w under Beta(a0, b0) by Gauss-Jacobi).  The pseudo-people go into the same
SiteLikelihood as the data, weighted, so the refit maximises one likelihood.

Why it behaves like `weight` outcomes:
* it *is* the expected log-likelihood of `weight` outcomes (weight / 2 pseudo-people of two
  asks each) from a site that works exactly as the parameter file says, so its curvature at
  the file's values is the Fisher information of that many outcomes, and its pull on the
  estimates is that of as many more observations;
* its maximum is exactly the file's values (Gibbs' inequality: the expected score vanishes at
  the truth, as sum_y P_theta(y) = 1 for every theta), so weight -> infinity returns the file,
  and weight = 0 returns the plain maximum likelihood of the data (`helpaware fit`);
* every constant is determined by the pseudo-outcomes alone, so the penalised problem has a
  maximum even where the data alone have none (all helped, one person, one context), which is
  what keeps a few outcomes from swinging it.

A floor under the curvature.  Some constants are barely determined by any number of outcomes
of the model: the pseudo-outcomes' information about logit notice_probability is about 1e-4
per outcome, so 200 of them hold it with a standard deviation of 7 logit units, and 20 real
outcomes could swing it from 0.8 to 0.5.  So the penalty also has a Gaussian term, centred on
the file's values, that lifts the curvature of the whole penalty at the file's values to at
least `weight * MIN_INFORMATION` in every direction of the optimiser's coordinates (log a0,
log b0, k_busy, k_load, logit q, logit tau, log h): the pseudo-outcomes' expected information
matrix I (exact, by differences of the exact gradient) has its eigenvalues below the floor
raised to it, and the Gaussian term's precision is weight times the difference.  The limits
stay exact (the term is centred on the file's values and scales with the weight), and a
constant the data determine well is still moved as by `weight` outcomes.

decline_aloud (tau) is not in the parameter file (it changes nothing in the node); the pseudo
outcomes report like the data do: tau = the data's share of declines among answers that were
not help, clipped to [0.1, 0.9] so that both kinds occur (0.5 without such answers).
"""
from __future__ import annotations

from dataclasses import replace
import itertools
import math

import numpy as np

from .data import AskAges, DECLINED, from_arrays, HELPED, NO_RESPONSE, OutcomeData
from .site_likelihood import beta_rule, SiteParams

BUSYNESS_LEVELS = (0.15, 0.45, 0.75)
GAP_FACTORS = (0.25, 1.0, 4.0)         # second ask this many file half-lives after the first
EARLIER_ASKS = (1, 3)                  # asks before the second one, GAP apart (the first answered)
REGULAR_ASKS = 8                       # asks of each pseudo regular
REGULAR_BUSYNESS = 0.3                 # the core's default busyness
# least information per pseudo-outcome in any direction: 1/25 of a coin flip's about its own
# log-odds (1/4); with weight 200 a direction can move 0.7 (one s.d.) on its scale without
# data. Our choice, no source: strong enough that a shift's outcomes cannot swing a weakly
# determined constant, weak enough that thousands of outcomes still move it
MIN_INFORMATION = 0.01
RESULTS = (HELPED, DECLINED, NO_RESPONSE)
TAU_RANGE = (0.1, 0.9)
NEUTRAL_TAU = 0.5


def reporting_share(data: OutcomeData) -> float:
    """Return tau of the pseudo-outcomes: declines among the data's answers other than help."""
    c = data.counts()
    other = c["declined"] + c["no_response"]
    if other == 0:
        return NEUTRAL_TAU
    return float(min(max(c["declined"] / other, TAU_RANGE[0]), TAU_RANGE[1]))


def _result_probability(result: int, w: np.ndarray, c: float, p: SiteParams) -> np.ndarray:
    nu = p.decline_aloud + p.notice_probability * (1.0 - p.decline_aloud)
    if result == HELPED:
        return nu * w * c
    if result == DECLINED:
        return p.decline_aloud * (1.0 - w * c)
    return (1.0 - p.decline_aloud) * (1.0 - p.notice_probability * w * c)


def pseudo_outcomes(target: SiteParams, weight: float) -> OutcomeData:
    """`weight` pseudo-outcomes of the site model `target` (its half-life must be set)."""
    if weight <= 0.0:
        raise ValueError(f"weight: {weight!r} must be > 0 (0 means no shrinkage: no pseudo "
                         "outcomes)")
    rows = _Rows()
    _regulars(rows, target, weight / 2.0)
    _contexts(rows, target, weight / 2.0)
    keys = [f"pseudo{i:05d}" for i in range(len(rows.weight))]
    return from_arrays(rows.person, rows.x, rows.load, rows.result, keys,
                       sources=("parameter file",), prior_asks=AskAges.from_lists(rows.ages),
                       weight=rows.weight)


class _Rows:

    def __init__(self) -> None:
        self.person: list[str] = []
        self.x: list[float] = []
        self.load: list[float] = []
        self.result: list[int] = []
        self.ages: list[list[float]] = []
        self.weight: list[float] = []

    def add(self, results, xs, loads, ages, weight: float) -> None:
        key = f"pseudo{len(self.weight):05d}"
        self.person += [key] * len(results)
        self.x += list(xs)
        self.load += list(loads)
        self.result += list(results)
        self.ages += list(ages)
        self.weight.append(weight)


def _regulars(rows: _Rows, p: SiteParams, outcomes: float) -> None:
    m = REGULAR_ASKS
    x_nodes, logw = beta_rule(m // 2 + 1, p.prior_a, p.prior_b)     # exact to degree m
    qw = np.exp(logw)
    c = float(np.exp(-p.k_busy * REGULAR_BUSYNESS))
    probs = {r: _result_probability(r, x_nodes, c, p) for r in RESULTS}
    for n_h in range(m + 1):
        for n_d in range(m + 1 - n_h):
            n_r = m - n_h - n_d
            ways = math.factorial(m) // (math.factorial(n_h) * math.factorial(n_d)
                                         * math.factorial(n_r))
            prob = ways * float(np.sum(qw * probs[HELPED] ** n_h * probs[DECLINED] ** n_d
                                       * probs[NO_RESPONSE] ** n_r))
            if prob <= 0.0:
                continue
            results = [HELPED] * n_h + [DECLINED] * n_d + [NO_RESPONSE] * n_r
            rows.add(results, [REGULAR_BUSYNESS] * m, [0.0] * m, [[]] * m, outcomes / m * prob)


def _contexts(rows: _Rows, p: SiteParams, outcomes: float) -> None:
    assert p.ask_memory_half_life_s is not None   # the file's constants always give it
    h = float(p.ask_memory_half_life_s)
    x_nodes, logw = beta_rule(2, p.prior_a, p.prior_b)              # exact to degree 2
    qw = np.exp(logw)
    designs = list(itertools.product(BUSYNESS_LEVELS, BUSYNESS_LEVELS, GAP_FACTORS,
                                     EARLIER_ASKS))
    for x1, x2, gap, earlier in designs:
        ages = [gap * h * j for j in range(1, earlier + 1)]
        load2 = sum(2.0 ** (-gap * j) for j in range(1, earlier + 1))
        c1 = float(np.exp(-p.k_busy * x1))
        c2 = float(np.exp(-(p.k_busy * x2 + p.k_load * load2)))
        for y1, y2 in itertools.product(RESULTS, RESULTS):
            prob = float(np.sum(qw * _result_probability(y1, x_nodes, c1, p)
                                * _result_probability(y2, x_nodes, c2, p)))
            if prob > 0.0:          # a pair the file's model never gives (tau 0 or 1): none
                rows.add([y1, y2], [x1, x2], [0.0, load2], [[], ages],
                         outcomes / 2.0 / len(designs) * prob)


def curvature_floor(target: SiteParams, weight: float, pseudo: OutcomeData
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Return the Gaussian term that lifts the penalty's curvature.

    (centre, precision) in the fit's theta of the Gaussian term that lifts the penalty's curvature
    at the file's values to weight * MIN_INFORMATION in every direction.
    """
    from .convergence import hessian_by_differences
    from .site_fit import NAMES, Objective, to_theta
    from .site_likelihood import SiteLikelihood
    centre = to_theta(target)
    assert pseudo.weight is not None   # pseudo_outcomes always weighs its rows
    unit = replace(pseudo, weight=pseudo.weight / weight)      # one pseudo-outcome's worth
    obj = Objective([SiteLikelihood(unit, use_reporting_factor=True)],
                    np.ones(len(NAMES), bool), centre)
    info = -hessian_by_differences(lambda t: obj.loglik_and_grad(t)[1], centre,
                                   range(len(NAMES)))
    vals, vecs = np.linalg.eigh(0.5 * (info + info.T))
    lift = np.maximum(MIN_INFORMATION - vals, 0.0)
    return centre, weight * (vecs * lift) @ vecs.T
