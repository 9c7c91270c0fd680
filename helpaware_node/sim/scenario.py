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

"""Scenario files (our own YAML format, docs/scenarios.md): load and validate with named errors."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

from ..core.model import check_range, CoreInputError, DecisionConfig
from ..yamlfile import load_yaml_file


class ScenarioError(CoreInputError):
    """A scenario value is missing or out of range; the message names the field."""


@dataclass(frozen=True)
class Activity:
    name: str
    busyness_low: float
    busyness_high: float
    mean_duration_s: float
    weight: float
    never_ask: bool


@dataclass(frozen=True)
class NeedKind:
    kind: str
    weight: float
    continue_cost_s: float
    help_time_s: float


@dataclass(frozen=True)
class WorldCosts:
    """What an ask costs the world, in robot-seconds.

    The simulator's reward uses these, never the robot's DecisionConfig, so runs with different
    robot parameters stay comparable. Continue cost and help time are per need kind (NeedKind).
    Defaults: the shipped DecisionConfig values, so a scenario without a `costs` section keeps its
    meaning.
    """

    ask_time_s: float = DecisionConfig.ask_time_s                 # lost to an ask not helped
    interruption_weight_s: float = DecisionConfig.interruption_weight_s
    busy_cost: float = DecisionConfig.busy_cost                   # I = weight (1 + busy_cost x
    repeat_cost: float = DecisionConfig.repeat_cost               # + repeat_cost f_true)

    def interruption_s(self, busyness: float, true_ask_load: float) -> float:
        return self.interruption_weight_s * (1.0 + self.busy_cost * busyness
                                             + self.repeat_cost * true_ask_load)


@dataclass(frozen=True)
class Scenario:
    name: str
    description: str
    days: int
    hours_per_day: float
    needs_per_hour: float
    kinds: tuple[NeedKind, ...]
    regulars: int
    regulars_per_need: float          # mean number of regulars near the robot at a need
    encounter_spread: float           # gamma shape of how unevenly regulars are around
    strangers_per_need: float         # mean number of one-off passers-by at a need
    willingness: tuple[tuple[float, float, float], ...]          # (weight, a, b) mixture
    stranger_willingness: tuple[tuple[float, float, float], ...]
    activities: tuple[Activity, ...]
    max_distance_m: float             # people are placed uniformly up to this distance
    truth_model: str                  # "ours" or "logistic"
    truth_k_busy: float
    truth_k_load: float
    truth_ask_half_life_s: float
    truth_logit_sd: float             # logistic truth: sd of the person intercept
    no_response_fraction: float       # share of non-helps that are no response
    costs: WorldCosts = WorldCosts()  # the world's own costs of an ask (reward)

    @property
    def never_ask_activities(self) -> tuple[str, ...]:
        return tuple(a.name for a in self.activities if a.never_ask)


def _chk(name, value, low, high, **kw) -> float:
    try:
        return check_range(name, value, low, high, **kw)
    except CoreInputError as exc:
        raise ScenarioError(str(exc)) from None


def _get(data: Mapping, key: str, where: str, default: Any = ...):
    if not isinstance(data, Mapping):
        raise ScenarioError(f"{where}: expected a mapping, got {type(data).__name__}")
    if key not in data:
        if default is ...:
            raise ScenarioError(f"{where}.{key}: missing (required)")
        return default
    return data[key]


def _num(data, key, where, low, high=float("inf"), default: Any = ..., low_open=False):
    value = _get(data, key, where, default)
    return _chk(f"{where}.{key}", value, low, high, low_open=low_open)


def _mixture(data, where) -> tuple[tuple[float, float, float], ...]:
    """`{beta: [a, b]}` or `{mixture: [{weight: w, beta: [a, b]}, ...]}`."""
    if not isinstance(data, Mapping):
        raise ScenarioError(f"{where}: expected {{beta: [a, b]}} or {{mixture: [...]}}")
    parts = data["mixture"] if "mixture" in data else [{"weight": 1.0, "beta": data.get("beta")}]
    if not isinstance(parts, list) or not parts:
        raise ScenarioError(f"{where}.mixture: must be a non-empty list")
    out = []
    for k, part in enumerate(parts):
        w = f"{where}.mixture[{k}]" if "mixture" in data else where
        ab = _get(part, "beta", w)
        if not isinstance(ab, list) or len(ab) != 2:
            raise ScenarioError(f"{w}.beta: must be a list [a, b] of two numbers > 0")
        a = _chk(f"{w}.beta[0]", ab[0], 0.0, 1e6, low_open=True)
        b = _chk(f"{w}.beta[1]", ab[1], 0.0, 1e6, low_open=True)
        out.append((_num(part, "weight", w, 0.0, 1e6, default=1.0), a, b))
    if sum(p[0] for p in out) <= 0:
        raise ScenarioError(f"{where}: mixture weights must not all be 0")
    return tuple(out)


def parse(data: Mapping, source: str = "scenario") -> Scenario:
    where = "scenario"
    name = str(_get(data, "name", where))
    shift = _get(data, "shift", where)
    people = _get(data, "people", where)
    needs = _get(data, "needs", where)
    truth = _get(data, "ground_truth", where, {})
    kinds_raw = _get(needs, "kinds", "needs")
    if not isinstance(kinds_raw, list) or not kinds_raw:
        raise ScenarioError("needs.kinds: must be a non-empty list")
    kinds = []
    for k, item in enumerate(kinds_raw):
        w = f"needs.kinds[{k}]"
        kinds.append(NeedKind(str(_get(item, "kind", w)), _num(item, "weight", w, 0.0, 1e6, 1.0),
                              _num(item, "continue_cost_s", w, 0.0, 1e6),
                              _num(item, "help_time_s", w, 0.0, 1e6)))
    acts_raw = _get(data, "activities", where)
    if not isinstance(acts_raw, list) or not acts_raw:
        raise ScenarioError("activities: must be a non-empty list")
    acts = []
    for k, item in enumerate(acts_raw):
        w = f"activities[{k}]"
        busy = _get(item, "busyness", w)
        lo, hi = (busy, busy) if not isinstance(busy, list) else tuple(busy + [None])[:2]
        if hi is None:
            raise ScenarioError(f"{w}.busyness: a number or a list [low, high] in [0, 1]")
        lo = _chk(f"{w}.busyness", lo, 0.0, 1.0)
        hi = _chk(f"{w}.busyness", hi, lo, 1.0)
        never = _get(item, "never_ask", w, False)
        if not isinstance(never, bool):
            raise ScenarioError(f"{w}.never_ask: must be true or false")
        acts.append(Activity(str(_get(item, "name", w)), lo, hi,
                             _num(item, "mean_duration_s", w, 0.0, 1e6, low_open=True),
                             _num(item, "weight", w, 0.0, 1e6, 1.0), never))
    costs_raw = _get(data, "costs", where, {})
    base = WorldCosts()
    costs = WorldCosts(**{f: _num(costs_raw, f, "costs", 0.0, 1e6, getattr(base, f))
                          for f in ("ask_time_s", "interruption_weight_s", "busy_cost",
                                    "repeat_cost")})
    unknown_costs = sorted(set(costs_raw) - set(WorldCosts.__dataclass_fields__))
    if unknown_costs:
        raise ScenarioError(f"costs: unknown field(s) {', '.join(map(str, unknown_costs))}")
    model = str(_get(truth, "model", "ground_truth", "ours"))
    if model not in ("ours", "logistic"):
        raise ScenarioError(f"ground_truth.model: {model!r} is not one of ours, logistic")
    days = _get(shift, "days", "shift")
    if isinstance(days, bool) or not isinstance(days, int) or not 1 <= days <= 3650:
        raise ScenarioError(f"shift.days: {days!r} must be a whole number in [1, 3650]")
    regulars = _get(people, "regulars", "people")
    if isinstance(regulars, bool) or not isinstance(regulars, int) or not 0 <= regulars <= 100000:
        raise ScenarioError(f"people.regulars: {regulars!r} must be a whole number in [0, 100000]")
    sc = Scenario(
        name=name, description=str(_get(data, "description", where, "")), days=days,
        hours_per_day=_num(shift, "hours_per_day", "shift", 0.0, 24.0, low_open=True),
        needs_per_hour=_num(needs, "per_hour", "needs", 0.0, 1e4, low_open=True),
        kinds=tuple(kinds), regulars=regulars,
        regulars_per_need=_num(people, "regulars_per_need", "people", 0.0, 1e4, 0.0),
        encounter_spread=_num(people, "encounter_spread", "people", 0.0, 1e6, 2.0, low_open=True),
        strangers_per_need=_num(people, "strangers_per_need", "people", 0.0, 1e4, 0.0),
        willingness=_mixture(_get(people, "willingness", "people"), "people.willingness"),
        stranger_willingness=_mixture(_get(people, "stranger_willingness", "people",
                                           _get(people, "willingness", "people")),
                                      "people.stranger_willingness"),
        activities=tuple(acts),
        max_distance_m=_num(people, "max_distance_m", "people", 0.0, 1e4, 8.0, low_open=True),
        truth_model=model,
        truth_k_busy=_num(truth, "k_busy", "ground_truth", 0.0, 50.0, 2.0),
        truth_k_load=_num(truth, "k_load", "ground_truth", 0.0, 50.0, 0.7),
        truth_ask_half_life_s=_num(truth, "ask_memory_half_life_s", "ground_truth", 0.0, 1e9,
                                   1800.0, low_open=True),
        truth_logit_sd=_num(truth, "intercept_sd", "ground_truth", 0.0, 20.0, 1.5),
        no_response_fraction=_num(truth, "no_response_fraction", "ground_truth", 0.0, 1.0, 0.2),
        costs=costs,
    )
    if sc.regulars == 0 and sc.strangers_per_need == 0:
        raise ScenarioError("people: regulars and strangers_per_need are both 0 (nobody to ask)")
    if sc.regulars > 0 and sc.regulars_per_need > sc.regulars:
        raise ScenarioError(f"people.regulars_per_need: {sc.regulars_per_need} exceeds "
                            f"people.regulars ({sc.regulars})")
    known = {"name", "description", "shift", "people", "needs", "activities", "ground_truth",
             "costs"}
    unknown = sorted(set(data) - known)
    if unknown:
        raise ScenarioError(f"scenario: unknown field(s) {', '.join(unknown)}")
    return sc


def load(path: str) -> Scenario:
    data = load_yaml_file(path, ScenarioError, "scenario file")
    if not isinstance(data, Mapping):
        raise ScenarioError(f"scenario file {path}: top level must be a mapping")
    return parse(data, path)
