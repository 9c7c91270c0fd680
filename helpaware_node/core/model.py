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

"""The site model and the decision settings, each one immutable value.

`SiteModel` holds what describes people at a site (the willingness prior and how context
lowers help); `DecisionConfig` holds the robot's costs and the hard limits.  Both validate
themselves on construction, so a bad value fails loudly with its field and allowed range.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
import functools
import hashlib
import json
import math
from typing import Any, ClassVar, Mapping, Protocol, TypeVar

from .preview import describe, short_name, short_number

# the most asks a cap may allow: every ask the cap counts travels in each decision document,
# whose time lists hold at most this many (wire.MAX_TIMES), so review and replay can read it
MAX_ASKS_CAP = 1000

# the longest re-ask interval allowed (30 days): the core keeps each person's latest ask this
# long (core.person.note_ask), so every allowed interval holds; a longer one would need an
# ask history kept without end. Common practice, no source: a month covers any "not again
# soon" policy a site has asked for; longer is an opt-out, which the store keeps for good.
MAX_REASK_INTERVAL_S = 30 * 86400.0


class CoreInputError(ValueError):
    """A value given to the core is outside what the model allows (names field and range)."""


def check_range(name: str, value: Any, low: float, high: float = math.inf,
                low_open: bool = False, high_open: bool = False) -> float:
    """Return `value` as float or raise CoreInputError naming `name` and the allowed range.

    The message is bounded and never recurses into `value` (core.preview), whatever it is.
    """
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise CoreInputError(f"{short_name(name)}: expected a number, got {describe(value)}")
    try:
        v = float(value)
    except OverflowError:   # an integer beyond any float: outside every range here
        v = math.inf if value > 0 else -math.inf
    lo_ok = v > low if low_open else v >= low
    hi_ok = v < high if high_open else v <= high
    if math.isnan(v) or not lo_ok or not hi_ok:
        lb = "(" if low_open else "["
        hb = ")" if high_open or math.isinf(high) else "]"
        shown = short_number(value) if isinstance(value, int) and math.isinf(v) else repr(v)
        raise CoreInputError(f"{short_name(name)}: {shown} is outside the allowed range "
                             f"{lb}{low:g}, {high:g}{hb}")
    return v


@dataclass(frozen=True)
class SiteModel:
    """Site-level constants of the willingness model (DESIGN.md section 3)."""

    prior_a: float = 2.0                   # a0 of the Beta prior on willingness
    prior_b: float = 2.0                   # b0
    k_busy: float = 2.0                    # context: weight of busyness in c
    k_load: float = 0.7                    # context: weight of recent asks in c
    notice_probability: float = 0.8        # chance a person noticed an ask they did not answer
    ask_memory_half_life_s: float = 1800.0  # h: how fast the ask load decays
    evidence_half_life_s: float = 0.0      # H: forgetting towards the prior (0 disables)
    default_busyness: float = 0.3          # used when perception gives no busyness

    def __post_init__(self) -> None:
        check_range("prior_a", self.prior_a, 0.0, 1e6, low_open=True)
        check_range("prior_b", self.prior_b, 0.0, 1e6, low_open=True)
        check_range("k_busy", self.k_busy, 0.0, 50.0)
        check_range("k_load", self.k_load, 0.0, 50.0)
        check_range("notice_probability", self.notice_probability, 0.0, 1.0)
        check_range("ask_memory_half_life_s", self.ask_memory_half_life_s, 0.0, 1e9, low_open=True)
        check_range("evidence_half_life_s", self.evidence_half_life_s, 0.0, 1e12)
        check_range("default_busyness", self.default_busyness, 0.0, 1.0)


DEFAULT_CONTINUE_COSTS_S: Mapping[str, float] = {
    "door": 90.0,
    "elevator": 120.0,
    "blocked_corridor": 60.0,
    "localisation": 180.0,
    "handover": 240.0,
    "navigation_failure": 120.0,
}


@dataclass(frozen=True)
class DecisionConfig:
    """Costs (robot-seconds), look-ahead settings and hard limits of the decision (section 4)."""

    help_time_s: float = 20.0              # t_help: seconds a successful ask takes
    ask_time_s: float = 10.0               # t_ask: seconds lost to a declined ask
    interruption_weight_s: float = 6.0     # I = weight * (1 + busy_cost*x + repeat_cost*f)
    busy_cost: float = 3.0
    repeat_cost: float = 2.0
    urgency_cost_gain: float = 1.0         # C_r = base * (1 + gain * urgency)
    default_continue_cost_s: float = 120.0  # for a kind not in continue_costs_s
    continue_costs_s: Mapping[str, float] = field(
        default_factory=lambda: dict(DEFAULT_CONTINUE_COSTS_S))
    # information value: a "typical" future request, and how many such requests matter
    typical_busyness: float = 0.3
    typical_continue_cost_s: float = 120.0
    lookahead_horizon_s: float = 28800.0    # future requests counted up to 8 h ahead
    future_discount_time_s: float = 14400.0  # exponential discount of later requests
    # prior mean rate of a never-seen person (decision.md)
    prior_candidate_rate_per_day: float = 0.3
    prior_rate_window_s: float = 28800.0     # weight of that prior rate, in seconds seen
    # hard limits, applied before any score
    min_reask_interval_s: float = 900.0
    max_asks_per_person_per_day: int = 3
    max_asks_per_hour: int = 12
    busyness_limit: float = 0.85
    max_distance_m: float = 8.0
    max_observation_age_s: float = 3.0
    protected_activities: tuple[str, ...] = ("with_patient",)

    def __post_init__(self) -> None:
        for name in ("help_time_s", "ask_time_s", "interruption_weight_s", "busy_cost",
                     "repeat_cost", "urgency_cost_gain", "default_continue_cost_s",
                     "typical_continue_cost_s", "lookahead_horizon_s",
                     "prior_candidate_rate_per_day"):
            check_range(name, getattr(self, name), 0.0, 1e9)
        check_range("min_reask_interval_s", self.min_reask_interval_s, 0.0, MAX_REASK_INTERVAL_S)
        check_range("future_discount_time_s", self.future_discount_time_s, 0.0, 1e12,
                    low_open=True)
        check_range("prior_rate_window_s", self.prior_rate_window_s, 0.0, 1e12, low_open=True)
        check_range("typical_busyness", self.typical_busyness, 0.0, 1.0)
        check_range("busyness_limit", self.busyness_limit, 0.0, 1.0)
        check_range("max_distance_m", self.max_distance_m, 0.0, 1e6)
        check_range("max_observation_age_s", self.max_observation_age_s, 0.0, 1e9)
        for name in ("max_asks_per_person_per_day", "max_asks_per_hour"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, int) or v < 0 or v > MAX_ASKS_CAP:
                raise CoreInputError(f"{name}: {short_number(v)} must be a whole number in "
                                     f"[0, {MAX_ASKS_CAP}]")
        if not isinstance(self.continue_costs_s, Mapping):
            raise CoreInputError(f"continue_costs_s: expected a mapping of kind to seconds, "
                                 f"got {describe(self.continue_costs_s)}")
        for kind, cost in self.continue_costs_s.items():
            if not isinstance(kind, str) or not kind:
                raise CoreInputError(f"continue_costs_s: kind {describe(kind)} must be a "
                                     f"non-empty string")
            check_range(f"continue_costs_s[{kind}]", cost, 0.0, 1e9)
        labels = self.protected_activities
        if isinstance(labels, (str, bytes)) or not isinstance(labels, (list, tuple)):
            raise CoreInputError(f"protected_activities: expected a list of labels, "
                                 f"got {describe(labels)}")
        for label in labels:
            if not isinstance(label, str):
                raise CoreInputError(f"protected_activities: label {describe(label)} must be "
                                     f"a string")
        # freeze the mapping so the value really is immutable (and hashable by content)
        object.__setattr__(self, "continue_costs_s", _FrozenDict(self.continue_costs_s))
        object.__setattr__(self, "protected_activities", tuple(self.protected_activities))

    def continue_cost_s(self, kind: str, urgency: float = 0.0) -> float:
        """C_r for a request kind and urgency in [0, 1]."""
        base = self.continue_costs_s.get(kind, self.default_continue_cost_s)
        return base * (1.0 + self.urgency_cost_gain * urgency)


class _Dataclass(Protocol):
    """What dataclasses.fields needs: any dataclass (as typeshed's DataclassInstance)."""

    __dataclass_fields__: ClassVar[dict[str, Any]]


_T = TypeVar("_T", bound=_Dataclass)


class _FrozenDict(dict[str, float]):
    """A read-only dict, so a DecisionConfig's continue costs cannot change under it."""

    def _refuse(self, *args: Any, **kwargs: Any) -> None:
        raise TypeError("DecisionConfig.continue_costs_s is read-only; use dataclasses.replace")

    __setitem__ = __delitem__ = clear = pop = popitem = _refuse  # type: ignore
    setdefault = update = _refuse  # type: ignore

    def __hash__(self) -> int:  # type: ignore[override]
        return hash(tuple(sorted(self.items())))


def to_plain(value: Any) -> dict[str, Any]:
    """Return a SiteModel or DecisionConfig as plain JSON-ready values."""
    out = dataclasses.asdict(value)
    for k, v in out.items():
        if isinstance(v, tuple):
            out[k] = list(v)
        elif isinstance(v, dict):
            out[k] = dict(sorted(v.items()))
    return out


def from_plain(cls: type[_T], data: Mapping[str, Any]) -> _T:
    """Build `cls` from plain values; unknown keys are refused by name."""
    names = {f.name for f in dataclasses.fields(cls)}
    if not isinstance(data, Mapping):
        raise CoreInputError(f"{cls.__name__}: expected a mapping of fields, got {describe(data)}")
    unknown = [k for k in data if k not in names]
    if unknown:
        shown = ", ".join(short_name(k) for k in unknown[:3])
        more = f" and {len(unknown) - 3} more" if len(unknown) > 3 else ""
        raise CoreInputError(f"{cls.__name__}: unknown field(s) {shown}{more}")
    return cls(**data)


@functools.lru_cache(maxsize=64)
def params_hash(model: SiteModel, config: DecisionConfig) -> str:
    """Short stable hash of every value in force, carried by each decision."""
    text = json.dumps({"model": to_plain(model), "config": to_plain(config)},
                      sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]
