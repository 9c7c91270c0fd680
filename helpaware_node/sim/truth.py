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

"""The site-informed constants: what our model's site constants are on a simulated site.

`true_site_model(sc, base)` gives the robot's `SiteModel` with the world's own constants, and
`informed_config(sc, config)` the robot's `DecisionConfig` with the world's costs; together
they make the site-informed policy (`informed`): our policy told the truth about the site, the
ceiling for anything that learns the site only from outcomes. The mapping (docs/scenarios.md):

- prior (a0, b0): the willingness of a person the robot meets for the first time, each
  distinct person counted once (the fit's marginal likelihood weighs people that way):
  regulars (`people.regulars`) and strangers (the expected number met over the run) pooled,
  then moment-matched to one Beta (same mean and variance). A mixture or a logistic truth is
  no Beta, so this is the nearest Beta in its first two moments, not the truth itself.
- k_busy, k_load, ask_memory_half_life_s: the truth's own. For a logistic truth, logit P =
  logit w - k x, there is no exact counterpart of ours, P = w exp(-k x); we keep the same k:
  the two agree as P -> 0 (logistic(logit w - k x) = w e^(-kx) / (1 - w + w e^(-kx))), and
  for larger P ours overstates the effect by about 1 / (1 - P).
- notice_probability = 1: in the world every ask reaches the person, who helps with the
  true P(help); a non-help ends silent with a probability (`no_response_fraction`) that does
  not depend on willingness, so a silence carries exactly the evidence of a decline. The
  fraction is the fit's nuisance term decline_aloud = 1 - no_response_fraction, which changes
  no belief.
- costs: the scenario's `costs` section (t_ask, interruption weight, busy and repeat cost).
Everything else (look-ahead settings, hard limits, evidence forgetting) stays the robot's.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np

from .scenario import Scenario
from ..core.model import DecisionConfig, SiteModel

_HERMITE_NODES = 80    # Gauss-Hermite nodes for the moments of a logistic-normal willingness


def beta_mixture_moments(mixture) -> tuple[float, float]:
    """Mean and E[w^2] of a weighted mixture of Beta(a, b).

    E[w] = a/s, E[w^2] = a (a + 1) / (s (s + 1)), s = a + b, per component.
    """
    total = sum(m[0] for m in mixture)
    m1 = sum(wt * a / (a + b) for wt, a, b in mixture) / total
    m2 = sum(wt * a * (a + 1.0) / ((a + b) * (a + b + 1.0)) for wt, a, b in mixture) / total
    return m1, m2


def logit_normal_moments(mean_w: float, sd: float) -> tuple[float, float]:
    """E[w] and E[w^2] of w = logistic(logit(mean_w) + sd z).

    z standard normal (the world's logistic truth), by Gauss-Hermite quadrature (probabilists'
    weight e^(-z^2/2)).
    """
    z, wts = np.polynomial.hermite_e.hermegauss(_HERMITE_NODES)
    wts = wts / wts.sum()
    mean_w = min(max(mean_w, 1e-6), 1.0 - 1e-6)
    w = 1.0 / (1.0 + np.exp(-(math.log(mean_w / (1.0 - mean_w)) + sd * z)))
    return float(np.sum(wts * w)), float(np.sum(wts * w * w))


def willingness_moments(sc: Scenario, mixture) -> tuple[float, float]:
    """E[w], E[w^2] of one group's true willingness, as the world draws it."""
    m1, m2 = beta_mixture_moments(mixture)
    if sc.truth_model == "logistic":
        return logit_normal_moments(m1, sc.truth_logit_sd)
    return m1, m2


def expected_strangers(sc: Scenario) -> float:
    return sc.strangers_per_need * sc.needs_per_hour * sc.hours_per_day * sc.days


def moment_matched_beta(mean: float, second: float) -> tuple[float, float]:
    """Return the Beta with this mean and E[w^2]: concentration m (1 - m) / var - 1."""
    var = max(second - mean * mean, 1e-12)
    conc = max(mean * (1.0 - mean) / var - 1.0, 1e-6)
    a = min(max(mean * conc, 1e-6), 1e6)
    b = min(max((1.0 - mean) * conc, 1e-6), 1e6)
    return a, b


def true_prior(sc: Scenario) -> tuple[float, float]:
    """(a0, b0): the moment-matched Beta of the willingness of a first-met person."""
    groups = []
    if sc.regulars:
        groups.append((float(sc.regulars), willingness_moments(sc, sc.willingness)))
    strangers = expected_strangers(sc)
    if strangers > 0:
        groups.append((strangers, willingness_moments(sc, sc.stranger_willingness)))
    total = sum(n for n, _ in groups)
    m1 = sum(n * m[0] for n, m in groups) / total
    m2 = sum(n * m[1] for n, m in groups) / total
    return moment_matched_beta(m1, m2)


def true_site_model(sc: Scenario, base: SiteModel = SiteModel()) -> SiteModel:
    a0, b0 = true_prior(sc)
    return dataclasses.replace(base, prior_a=a0, prior_b=b0, k_busy=sc.truth_k_busy,
                               k_load=sc.truth_k_load,
                               ask_memory_half_life_s=sc.truth_ask_half_life_s,
                               notice_probability=1.0)


def informed_config(sc: Scenario, config: DecisionConfig) -> DecisionConfig:
    """Return the robot's settings with the world's costs of an ask (limits, look-ahead kept)."""
    c = sc.costs
    return dataclasses.replace(config, ask_time_s=c.ask_time_s,
                               interruption_weight_s=c.interruption_weight_s,
                               busy_cost=c.busy_cost, repeat_cost=c.repeat_cost)


def describe_model(model: SiteModel) -> str:
    mean = model.prior_a / (model.prior_a + model.prior_b)
    return (f"prior Beta({model.prior_a:.3g}, {model.prior_b:.3g}) (mean {mean:.3f}), "
            f"k_busy {model.k_busy:g}, k_load {model.k_load:g}, ask memory half-life "
            f"{model.ask_memory_half_life_s:g} s, notice probability "
            f"{model.notice_probability:g}")
