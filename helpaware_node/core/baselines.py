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

"""Comparison policies: pure choosers over a core.policy.Evaluation (DESIGN.md section 4).

Each chooser returns the index of an eligible candidate or None (continue). They pick only
among candidates with no exclusion, so every hard limit holds for every policy; `conclude`
re-checks that. All of them go through core.policy.decide like the look-ahead policy.
"""
from __future__ import annotations

from typing import Callable, Optional

import numpy as np

from .model import DecisionConfig
from .policy import ask_advantage, best_positive, choose_lookahead, Chooser, Evaluation
from .preview import quoted


def _eligible(ev: Evaluation) -> list[int]:
    return [i for i in range(len(ev.candidates)) if ev.exclusions[i] is None]


def choose_never(ev: Evaluation) -> Optional[int]:
    """Never ask: the robot always continues on its own."""
    return None


def choose_nearest(ev: Evaluation) -> Optional[int]:
    """Ask the nearest eligible person at every need (ties: person id)."""
    idx = _eligible(ev)
    if not idx:
        return None
    return min(idx, key=lambda i: (ev.candidates[i].distance_m, ev.candidates[i].person_id))


class BusynessThreshold:
    """Context only: ask the nearest eligible person whose busyness is under a threshold."""

    def __init__(self, threshold: float = 0.3):
        self.threshold = threshold

    def __call__(self, ev: Evaluation) -> Optional[int]:
        idx = [i for i in _eligible(ev) if ev.busyness[i] < self.threshold]
        if not idx:
            return None
        return min(idx, key=lambda i: (ev.candidates[i].distance_m, ev.candidates[i].person_id))


class WillingnessOnly:
    """Willingness alone: the advantage with p = belief mean.

    Ignoring busyness and recent asks (interruption at its context-free base weight), and no
    information value.
    """

    def __init__(self, config: DecisionConfig):
        self.config = config

    def __call__(self, ev: Evaluation) -> Optional[int]:
        adv = ask_advantage(ev.mean, ev.continue_cost_s, ev.help_time_s, self.config.ask_time_s,
                            self.config.interruption_weight_s)
        return best_positive(ev, adv)


class ThompsonSampling:
    """Draw w from each candidate's Beta belief (seeded).

    Ask the best positive advantage with p = c * w in the same context and with the same
    interruption cost.
    """

    def __init__(self, config: DecisionConfig, seed: int = 0):
        self.config = config
        self.rng = np.random.default_rng(seed)

    def __call__(self, ev: Evaluation) -> Optional[int]:
        if not len(ev.candidates):
            return None
        w = self.rng.beta(ev.a, ev.b)
        adv = ask_advantage(ev.c * w, ev.continue_cost_s, ev.help_time_s, self.config.ask_time_s,
                            ev.interruption_s)
        return best_positive(ev, adv)


class Oracle:
    """A ceiling: asks the candidate with the best positive true score.

    `true_score(ev)` returns one value in robot-seconds per candidate from whoever knows the truth
    (the simulator, sim/oracle.py: the true advantage alone, or with the true lasting cost).
    """

    def __init__(self, true_score: Callable[[Evaluation], np.ndarray]):
        self.true_score = true_score

    def __call__(self, ev: Evaluation) -> Optional[int]:
        if not len(ev.candidates):
            return None
        return best_positive(ev, np.asarray(self.true_score(ev), dtype=float))


POLICY_NAMES = ("ours", "never", "nearest", "busyness", "willingness", "thompson", "oracle")


def make_chooser(name: str, config: DecisionConfig, seed: int = 0,
                 true_score: Optional[Callable[[Evaluation], np.ndarray]] = None,
                 busyness_threshold: float = 0.3) -> Chooser:
    """Return a fresh chooser by name (stateful ones carry their own seeded generator)."""
    if name == "ours":
        return choose_lookahead
    if name == "never":
        return choose_never
    if name == "nearest":
        return choose_nearest
    if name == "busyness":
        return BusynessThreshold(busyness_threshold)
    if name == "willingness":
        return WillingnessOnly(config)
    if name == "thompson":
        return ThompsonSampling(config, seed)
    if name == "oracle":
        if true_score is None:
            raise ValueError("oracle: needs the true scores (the simulator gives them)")
        return Oracle(true_score)
    raise ValueError(f"policy: {quoted(name)} is not one of {', '.join(POLICY_NAMES)}")
