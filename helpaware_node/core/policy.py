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

"""The decision at a help need: hard limits first, then a one-step look-ahead score.

For each eligible candidate i (DESIGN.md section 4):
  A_i   = p_i (C_r - t_help) - (1 - p_i) t_ask - I_i           immediate advantage, robot-s
  VOI_i = p_i U(m_helped) + (1 - p_i) U(m_declined) - U(m_i)    value of what the answer teaches
  N_i   = discounted number of future requests where i is a candidate (the rate at most the
          robot's max_asks_per_hour)
  LC_i  = what this ask's ask load takes from i's later requests (core/lasting.py)
  Q_i   = A_i + N_i VOI_i - LC_i
A + N VOI is the online knowledge-gradient score (Ryzhov, Powell and Frazier, Operations
Research 2012, from memory). Ask the best candidate when its Q is above zero; otherwise (ties
included) continue.
Exclusions are never traded for value; each carries a reason code.
"""
from __future__ import annotations

from dataclasses import dataclass
import enum
import math
from typing import Any, Callable, Optional, Sequence, Union

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .belief import Belief, declined_mean_from
from .context import context_factor
from .lasting import lasting_cost
from .model import check_range, CoreInputError, DecisionConfig, params_hash, SiteModel
from .person import belief_at, DAY_S, PersonRecord

HOUR_S = 3600.0


class Exclusion(str, enum.Enum):
    """Why a candidate could not be asked, in the order the limits are checked."""

    OPTED_OUT = "opted_out"
    PROTECTED_ACTIVITY = "protected_activity"
    STALE_OBSERVATION = "stale_observation"
    TOO_FAR = "too_far"
    TOO_BUSY = "too_busy"
    REASK_INTERVAL = "reask_interval"
    PERSON_DAILY_CAP = "person_daily_cap"
    ROBOT_HOURLY_CAP = "robot_hourly_cap"


@dataclass(frozen=True)
class HelpNeed:
    request_id: str
    kind: str
    opened_at_s: float
    urgency: float = 0.0
    continue_cost_s: Optional[float] = None   # overrides the per-kind cost
    help_time_s: Optional[float] = None       # overrides t_help

    def __post_init__(self) -> None:
        if not isinstance(self.request_id, str) or not self.request_id:
            raise CoreInputError("request_id: must be a non-empty string")
        if not isinstance(self.kind, str) or not self.kind:
            raise CoreInputError("kind: must be a non-empty string")
        check_range("opened_at_s", self.opened_at_s, -1e15, 1e15)
        check_range("urgency", self.urgency, 0.0, 1.0)
        if self.continue_cost_s is not None:
            check_range("continue_cost_s", self.continue_cost_s, 0.0, 1e9)
        if self.help_time_s is not None:
            check_range("help_time_s", self.help_time_s, 0.0, 1e9)


@dataclass(frozen=True)
class Candidate:
    """A person in view at the help need, with what the robot has learned of them."""

    person_id: str
    distance_m: float
    observed_at_s: float
    belief: Belief                       # brought to the decision time
    busyness: Optional[float] = None     # None: the site's default busyness
    activity: str = ""
    ask_times_s: tuple[float, ...] = ()
    candidate_count: int = 0
    first_seen_s: Optional[float] = None
    opted_out: bool = False

    def __post_init__(self) -> None:
        if not isinstance(self.person_id, str) or not self.person_id:
            raise CoreInputError("person_id: must be a non-empty string")
        # the usual case (plain floats in range) is settled by one comparison chain; anything
        # else goes through check_range, which names the field and the allowed range
        d, t, x = self.distance_m, self.observed_at_s, self.busyness
        if (type(d) is float and type(t) is float and 0.0 <= d <= 1e6 and -1e15 <= t <= 1e15
                and (x is None or (type(x) is float and 0.0 <= x <= 1.0))):
            return
        check_range(f"distance_m of {self.person_id}", d, 0.0, 1e6)
        check_range(f"observed_at_s of {self.person_id}", t, -1e15, 1e15)
        if x is not None:
            check_range(f"busyness of {self.person_id}", x, 0.0, 1.0)


def candidate_from_record(person_id: str, record: PersonRecord, now_s: float, model: SiteModel,
                          distance_m: float, observed_at_s: float,
                          busyness: Optional[float] = None, activity: str = "",
                          opted_out: bool = False) -> Candidate:
    """Return the one way node, simulator and replay turn a remembered person into a candidate.

    Built as the constructor builds it, with the same check (__post_init__), but its fields
    set in one step: a frozen dataclass's __init__ sets each through object.__setattr__,
    and this runs for every person in view at every need (test_decision_speedups.py checks
    that both give equal candidates and the same refusals).
    """
    cand = _new_object(Candidate)
    cand.__dict__.update(person_id=person_id, distance_m=distance_m,
                         observed_at_s=observed_at_s, belief=belief_at(record, now_s, model),
                         busyness=busyness, activity=activity, ask_times_s=record.ask_times_s,
                         candidate_count=record.candidate_count,
                         first_seen_s=record.first_seen_s, opted_out=opted_out)
    cand.__post_init__()
    return cand


_new_object = object.__new__


@dataclass(frozen=True)
class Evaluation:
    """Every number of the decision, one array entry per candidate (in input order)."""

    need: HelpNeed
    now_s: float
    candidates: tuple[Candidate, ...]
    exclusions: tuple[Optional[Exclusion], ...]
    continue_cost_s: float
    help_time_s: float
    a: np.ndarray
    b: np.ndarray
    mean: np.ndarray
    busyness: np.ndarray
    ask_load: np.ndarray
    c: np.ndarray
    p: np.ndarray
    interruption_s: np.ndarray
    advantage_s: np.ndarray
    voi_s: np.ndarray
    future_requests: np.ndarray
    lasting_cost_s: np.ndarray
    score_s: np.ndarray
    params_hash: str

    @property
    def eligible(self) -> np.ndarray:
        return np.array([e is None for e in self.exclusions], dtype=bool)


@dataclass(frozen=True)
class Decision:
    """An action with its rationale. `person_index` points into evaluation.candidates."""

    evaluation: Evaluation
    action: str                        # "ask" or "continue"
    person_index: Optional[int]
    why: str                           # short reason for the action
    policy: str = "lookahead"

    @property
    def person_id(self) -> Optional[str]:
        if self.person_index is None:
            return None
        return self.evaluation.candidates[self.person_index].person_id

    def rationale(self) -> list[dict[str, Any]]:
        """Per candidate: belief, context, A, VOI, N, lasting cost, Q.

        Or the exclusion that ruled them out.
        """
        ev = self.evaluation
        # one tolist() per array (plain floats, in one pass) instead of a float() per entry
        columns = zip(ev.a.tolist(), ev.b.tolist(), ev.mean.tolist(), ev.busyness.tolist(),
                      ev.ask_load.tolist(), ev.c.tolist(), ev.p.tolist(),
                      ev.interruption_s.tolist(), ev.advantage_s.tolist(), ev.voi_s.tolist(),
                      ev.future_requests.tolist(), ev.lasting_cost_s.tolist(),
                      ev.score_s.tolist())
        return [{"person_id": cand.person_id,
                 "excluded": None if excl is None else _EXCLUSION_TEXT[excl],
                 "a": a, "b": b, "mean": mean, "busyness": x, "ask_load": load,
                 "distance_m": float(cand.distance_m), "c": c, "p": p,
                 "interruption_s": i_s, "advantage_s": adv, "voi_s": voi,
                 "future_requests": fut, "lasting_cost_s": lc, "score_s": q}
                for cand, excl, (a, b, mean, x, load, c, p, i_s, adv, voi, fut, lc, q)
                in zip(ev.candidates, ev.exclusions, columns)]


# the reason codes as plain strings (Enum.value is a descriptor call per use)
_EXCLUSION_TEXT = {e: e.value for e in Exclusion}


def _limits(cands: Sequence[Candidate], busyness: Sequence[float], now_s: float,
            config: DecisionConfig, robot_capped: bool) -> list[Optional[Exclusion]]:
    """Return the first hard limit each candidate meets (None: eligible), in Exclusion order.

    One loop with the limits read once, not a call per candidate (the decision's hot path).
    """
    protected = config.protected_activities
    max_age_s, max_distance_m = config.max_observation_age_s, config.max_distance_m
    busy_limit, reask_s = config.busyness_limit, config.min_reask_interval_s
    daily_cap = config.max_asks_per_person_per_day
    out: list[Optional[Exclusion]] = []
    for cand, x in zip(cands, busyness):
        times = cand.ask_times_s
        if cand.opted_out:
            out.append(Exclusion.OPTED_OUT)
        elif cand.activity and cand.activity in protected:
            out.append(Exclusion.PROTECTED_ACTIVITY)
        elif now_s - cand.observed_at_s > max_age_s:
            out.append(Exclusion.STALE_OBSERVATION)
        elif cand.distance_m > max_distance_m:
            out.append(Exclusion.TOO_FAR)
        elif x >= busy_limit:
            out.append(Exclusion.TOO_BUSY)
        # the interval against every remembered ask, not only the last day's (an ask stamped
        # after now_s, from a clock that jumped back, counts as just made)
        elif times and any(now_s - t < reask_s for t in times):
            out.append(Exclusion.REASK_INTERVAL)
        elif (sum(1 for t in times if now_s - t < DAY_S) if times else 0) >= daily_cap:
            out.append(Exclusion.PERSON_DAILY_CAP)
        elif robot_capped:
            out.append(Exclusion.ROBOT_HOURLY_CAP)
        else:
            out.append(None)
    return out


Floats = NDArray[np.float64]
Num = Union[float, Floats]    # a value per candidate, or one for all


def ask_advantage(p: Floats, continue_cost_s: Num, help_time_s: Num, ask_time_s: float,
                  interruption_s: Num) -> Floats:
    """Return a = p (C - t_help) - (1 - p) t_ask - I."""
    return p * (continue_cost_s - help_time_s) - (1.0 - p) * ask_time_s - interruption_s


def typical_terms(mean: ArrayLike, model: SiteModel, config: DecisionConfig,
                  help_time_s: float) -> tuple[Floats, float, float]:
    """(alpha, beta, gamma) of the advantage at a typical future request with ask load L.

    alpha e^(-k_load L) - beta - gamma L, at typical busyness (DESIGN.md section 4).
    """
    gain, beta, gamma = _typical_constants(model, config, help_time_s)
    return gain * np.asarray(mean, dtype=float), beta, gamma


def _typical_constants(model: SiteModel, config: DecisionConfig,
                       help_time_s: float) -> tuple[float, float, float]:
    """(alpha per unit of mean, beta, gamma) of `typical_terms`."""
    cbar = math.exp(-model.k_busy * config.typical_busyness)
    ibar = config.interruption_weight_s * (1.0 + config.busy_cost * config.typical_busyness)
    gain = cbar * (config.typical_continue_cost_s - help_time_s + config.ask_time_s)
    return gain, config.ask_time_s + ibar, config.interruption_weight_s * config.repeat_cost


def typical_gain(mean: ArrayLike, model: SiteModel, config: DecisionConfig,
                 help_time_s: float) -> Floats:
    """U(m): advantage of the best choice at a typical future request (never below 0)."""
    gain, beta, _ = _typical_constants(model, config, help_time_s)
    return _typical_advantage(np.asarray(mean, dtype=float), gain, beta)


def _typical_advantage(mean: Floats, gain: float, beta: float) -> Floats:
    """U(m) = max(0, gain m - beta) from `_typical_constants` (typical_gain and the VOI)."""
    return np.maximum(0.0, gain * mean - beta)


def information_value(a: ArrayLike, b: ArrayLike, c: Floats, model: SiteModel,
                      config: DecisionConfig, help_time_s: float) -> Floats:
    """VOI = p U(m_helped) + (1 - p) U(m_declined) - U(m) with the updates the answer causes."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    s = a + b
    m = a / s
    return _information_value(a, b, np.asarray(c, dtype=float), s, m, c * m, model, config,
                              help_time_s)


def _information_value(a: Floats, b: Floats, c: Floats, s: Floats, m: Floats, p: Floats,
                       model: SiteModel, config: DecisionConfig, help_time_s: float) -> Floats:
    """Return `information_value` from parts evaluate has: s = a + b, m = a / s, p = c m."""
    s1 = s + 1.0
    m_helped = (a + 1.0) / s1
    m_declined = declined_mean_from(a, b, c, s, m, s1)
    # typical_gain of the three means, its constants worked out once
    gain, beta, _ = _typical_constants(model, config, help_time_s)
    voi: Floats = (p * _typical_advantage(m_helped, gain, beta)
                   + (1.0 - p) * _typical_advantage(m_declined, gain, beta)
                   - _typical_advantage(m, gain, beta))
    # U is convex and the mean a martingale, so VOI >= 0; clip only rounding noise
    return np.maximum(voi, 0.0)


def encounter_rate_per_s(counts: ArrayLike, first_seen_s: ArrayLike, now_s: float,
                         config: DecisionConfig) -> Floats:
    """How often this person is a candidate at a need.

    The Gamma-Poisson posterior mean (prior_count + count) / (window + time since first seen),
    prior_count = prior_candidate_rate_per_day * window / 1 day, window = prior_rate_window_s.

    `count` counts the needs before this one where the person was a candidate, the first
    included: the first encounter is how they entered the record, and this need (they are
    here now) is the first one after it, so `count` is the number of encounters seen since
    first_seen_s, the exposure that Gamma-Poisson conjugacy wants (docs/decision.md).
    """
    window = config.prior_rate_window_s
    prior_count = config.prior_candidate_rate_per_day * window / DAY_S
    span = np.maximum(now_s - np.asarray(first_seen_s, dtype=float), 0.0)
    return (prior_count + np.asarray(counts, dtype=float)) / (window + span)


def future_ask_rate_per_s(counts: ArrayLike, first_seen_s: ArrayLike, now_s: float,
                          config: DecisionConfig) -> Floats:
    """Return the rate of later requests where this person's answer or load can matter.

    The encounter rate, at most the robot's own max_asks_per_hour. Both the value of learning and
    the lasting cost are realised only at later asks, and the robot asks nobody more often than its
    hourly cap, so a person in view at every need weighs no more than that (without the cap, N and
    the lasting cost of such a person grow with the need rate without bound).
    """
    cap_per_s = config.max_asks_per_hour / 3600.0
    return np.minimum(encounter_rate_per_s(counts, first_seen_s, now_s, config), cap_per_s)


def discounted_horizon_s(config: DecisionConfig) -> float:
    """integral_0^H e^(-s/tau) ds = tau (1 - e^(-H/tau)): N per unit rate."""
    tau = config.future_discount_time_s
    return tau * -math.expm1(-config.lookahead_horizon_s / tau)


def future_requests(counts: ArrayLike, first_seen_s: ArrayLike, now_s: float,
                    config: DecisionConfig) -> Floats:
    """Return N, the expected discounted future requests with this person a candidate.

    N: expected discounted future requests with this person a candidate (the rate, capped at the
    robot's hourly ask cap, times the discounted length of the look-ahead horizon).
    """
    return future_ask_rate_per_s(counts, first_seen_s, now_s,
                                 config) * discounted_horizon_s(config)


def evaluate(need: HelpNeed, candidates: Sequence[Candidate], now_s: float,
             robot_ask_times_s: Sequence[float], model: SiteModel,
             config: DecisionConfig) -> Evaluation:
    """Screen every candidate against the hard limits and compute every score (vectorised)."""
    check_range("now_s", now_s, -1e15, 1e15)
    cands = tuple(candidates)
    n = len(cands)
    continue_cost = (need.continue_cost_s if need.continue_cost_s is not None
                     else config.continue_cost_s(need.kind, need.urgency))
    help_time = need.help_time_s if need.help_time_s is not None else config.help_time_s
    robot_recent = sum(1 for t in robot_ask_times_s if now_s - t < HOUR_S)
    robot_capped = robot_recent >= config.max_asks_per_hour

    h = model.ask_memory_half_life_s
    default_x = model.default_busyness
    # gathered into lists, then one array each (item assignment into arrays costs more)
    x_list = [default_x if c.busyness is None else c.busyness for c in cands]
    a = np.array([c.belief.a for c in cands], dtype=float)
    b = np.array([c.belief.b for c in cands], dtype=float)
    x = np.array(x_list, dtype=float)
    load_list = [sum(2.0 ** (-max(now_s - t, 0.0) / h) for t in c.ask_times_s)
                 if c.ask_times_s else 0.0 for c in cands]
    load = np.array(load_list, dtype=float)
    counts = np.array([c.candidate_count for c in cands], dtype=float)
    first = np.array([now_s if c.first_seen_s is None else c.first_seen_s for c in cands],
                     dtype=float)
    exclusions = _limits(cands, x_list, now_s, config, robot_capped)

    s = a + b
    mean = a / s if n else np.empty(0)
    total_load = sum(load_list)
    if total_load == total_load:
        # every busyness passed Candidate's check, and each load is a sum of 2^-age terms:
        # in range unless an ask time is NaN (NaN propagates into the sum), so c is
        # context_factor's arithmetic without its checks
        c = np.exp(-(model.k_busy * x + model.k_load * load))
    else:   # context_factor names the bad value
        c = np.asarray(context_factor(x, load, model.k_busy, model.k_load),
                       dtype=float).reshape(n)
    p = c * mean
    interruption = config.interruption_weight_s * (1.0 + config.busy_cost * x
                                                   + config.repeat_cost * load)
    advantage = ask_advantage(p, continue_cost, help_time, config.ask_time_s, interruption)
    voi = (_information_value(a, b, c, s, mean, p, model, config, help_time) if n
           else np.empty(0))
    rate = future_ask_rate_per_s(counts, first, now_s, config)
    fut = rate * discounted_horizon_s(config)
    alpha, beta, gamma = typical_terms(mean, model, config, help_time)
    lasting = lasting_cost(rate, alpha, beta, gamma, model.k_load, load, h,
                           config.future_discount_time_s, config.lookahead_horizon_s)
    score = advantage + fut * voi - lasting
    return Evaluation(need=need, now_s=now_s, candidates=cands, exclusions=tuple(exclusions),
                      continue_cost_s=float(continue_cost), help_time_s=float(help_time),
                      a=a, b=b, mean=mean, busyness=x, ask_load=load, c=c, p=p,
                      interruption_s=interruption, advantage_s=advantage, voi_s=voi,
                      future_requests=fut, lasting_cost_s=lasting, score_s=score,
                      params_hash=params_hash(model, config))


def best_positive(ev: Evaluation, values: np.ndarray) -> Optional[int]:
    """Index of the eligible candidate with the largest value > 0 (ties: nearer, then id)."""
    order = sorted((i for i in range(len(ev.candidates)) if ev.exclusions[i] is None),
                   key=lambda i: (-values[i], ev.candidates[i].distance_m,
                                  ev.candidates[i].person_id))
    if not order or not values[order[0]] > 0.0:
        return None
    return order[0]


def choose_lookahead(ev: Evaluation) -> Optional[int]:
    return best_positive(ev, ev.score_s)


Chooser = Callable[[Evaluation], Optional[int]]


def conclude(ev: Evaluation, index: Optional[int], policy: str = "lookahead") -> Decision:
    """Wrap a chooser's pick into a Decision with the reason for the action."""
    if index is not None:
        excluded = ev.exclusions[index]
        if excluded is not None:  # a chooser must never override a hard limit
            raise CoreInputError(f"policy {policy} picked an excluded candidate "
                                 f"({excluded.value})")
        return Decision(ev, "ask", index, "best_score_positive", policy)
    if not ev.candidates:
        why = "no_candidates"
    elif not ev.eligible.any():
        why = "all_excluded"
    else:
        why = "no_positive_score"
    return Decision(ev, "continue", None, why, policy)


def decide(need: HelpNeed, candidates: Sequence[Candidate], now_s: float,
           robot_ask_times_s: Sequence[float], model: SiteModel, config: DecisionConfig,
           chooser: Chooser = choose_lookahead, policy: str = "lookahead") -> Decision:
    """Return the one decision code path of node, simulator and replay."""
    ev = evaluate(need, candidates, now_s, robot_ask_times_s, model, config)
    return conclude(ev, chooser(ev), policy)
