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

"""What the robot remembers of one person, and the fold of outcome events into a belief.

The same functions serve the node, the simulator, replay and the store reload, so the belief
after a sequence of events does not depend on which of them applies it.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
import enum
from typing import Iterable

from .belief import Belief, forget, update_declined, update_helped, update_no_response
from .context import context_factor
from .model import check_range, CoreInputError, MAX_ASKS_CAP, MAX_REASK_INTERVAL_S, SiteModel
from .preview import quoted

DAY_S = 86400.0


class Result(str, enum.Enum):
    """What happened after the robot decided to ask."""

    HELPED = "helped"
    DECLINED = "declined"
    NO_RESPONSE = "no_response"
    COULD_NOT_ASK = "could_not_ask"   # the ask never reached the person: no evidence

    @classmethod
    def parse(cls, text: str) -> "Result":
        if isinstance(text, str):   # anything else: Enum's own message repr()s the value
            try:
                return cls(text)
            except ValueError:
                pass
        allowed = ", ".join(r.value for r in cls)
        raise CoreInputError(f"result: {quoted(text)} is not one of {allowed}")


@dataclass(frozen=True)
class OutcomeEvent:
    """One answered ask: the context is the one in force when the robot asked."""

    time_s: float          # when the ask was made
    result: Result
    busyness: float        # x at the ask
    ask_load: float        # f at the ask, before this ask
    event_id: str = ""     # robot id + sequence; orders events that share a time

    def __post_init__(self) -> None:
        check_range("time_s", self.time_s, -1e15, 1e15)
        check_range("busyness", self.busyness, 0.0, 1.0)
        check_range("ask_load", self.ask_load, 0.0, 1e6)
        if not isinstance(self.result, Result):
            object.__setattr__(self, "result", Result.parse(self.result))


def apply_event(belief: Belief, event: OutcomeEvent, model: SiteModel) -> Belief:
    """Update a belief (already brought to event.time_s) by one outcome."""
    c = context_factor(event.busyness, event.ask_load, model.k_busy, model.k_load)
    if event.result is Result.HELPED:
        return update_helped(belief)
    if event.result is Result.DECLINED:
        return update_declined(belief, c)
    if event.result is Result.NO_RESPONSE:
        return update_no_response(belief, c, model.notice_probability)
    return belief


def event_order(event: OutcomeEvent) -> tuple[float, str]:
    return (event.time_s, event.event_id)


def fold_events(events: Iterable[OutcomeEvent], model: SiteModel,
                start: Belief | None = None, start_time_s: float | None = None
                ) -> tuple[Belief, float | None]:
    """Belief after `events` in (time, event id) order, and the time of the last one."""
    prior = Belief.prior(model)
    belief = start if start is not None else prior
    last = start_time_s
    for event in sorted(events, key=event_order):
        belief, last = fold_next(belief, last, event, model, prior)
    return belief, last


def fold_next(belief: Belief, last_s: float | None, event: OutcomeEvent, model: SiteModel,
              prior: Belief) -> tuple[Belief, float | None]:
    """One step of fold_events: `belief` (last event at `last_s`) extended by `event`.

    `event` comes after every event folded in; `prior` is Belief.prior(model), passed in so a
    store extending one fold per outcome builds it once.
    """
    if last_s is not None:
        belief = forget(belief, prior, event.time_s - last_s, model.evidence_half_life_s)
    belief = apply_event(belief, event, model)
    return belief, event.time_s if last_s is None else max(last_s, event.time_s)


@dataclass(frozen=True)
class PersonRecord:
    """The learned state of one person: belief, recent asks, how often they are around."""

    belief: Belief
    belief_time_s: float | None = None      # time of the last evidence (for forgetting)
    ask_times_s: tuple[float, ...] = ()      # asks of this person (note_ask says which stay)
    candidate_count: int = 0                 # help needs where the person was a candidate
    first_seen_s: float | None = None

    @classmethod
    def new(cls, model: SiteModel) -> "PersonRecord":
        return cls(Belief.prior(model))


def belief_at(record: PersonRecord, now_s: float, model: SiteModel) -> Belief:
    """Return the belief brought forward to `now_s` by forgetting."""
    if record.belief_time_s is None:
        return record.belief
    return forget(record.belief, Belief.prior(model), now_s - record.belief_time_s,
                  model.evidence_half_life_s)


def note_candidate(record: PersonRecord, now_s: float) -> PersonRecord:
    first = now_s if record.first_seen_s is None else min(record.first_seen_s, now_s)
    # once per candidate per need: neither dataclasses.replace (every field named, in order)
    # nor the frozen constructor (object.__setattr__ per field), but the fields in one step
    # (test_decision_speedups.py checks it equals the replace it stands for)
    out = _new_object(PersonRecord)
    out.__dict__.update(belief=record.belief, belief_time_s=record.belief_time_s,
                        ask_times_s=record.ask_times_s,
                        candidate_count=record.candidate_count + 1, first_seen_s=first)
    return out


_new_object = object.__new__


def keep_recent_asks(ask_times_s: Iterable[float], now_s: float, horizon_s: float,
                     keep_last: int) -> tuple[float, ...]:
    """Return the asks inside the horizon, and always the newest `keep_last` of them in any case.

    Pruning by time alone lets one decision at a clock far ahead (a bad /clock, a wrong system
    time) drop every real ask; when the clock came back the caps would count from zero. The
    newest `keep_last` asks (the cap) are enough for a cap to bind again. Order is kept.
    """
    times = tuple(ask_times_s)
    first_kept = len(times) - max(int(keep_last), 0)
    return tuple(t for i, t in enumerate(times) if i >= first_kept or now_s - t < horizon_s)


def ask_history_horizon_s(model: SiteModel) -> float:
    """Asks this recent are all remembered.

    a day (the daily cap) or ten ask-memory half-lives if longer (the ask load; an older ask adds
    less than 2^-10).
    """
    return max(DAY_S, 10.0 * model.ask_memory_half_life_s)


def ask_retention_s(model: SiteModel) -> float:
    """Return how long a record must be kept after a person's latest ask.

    How long after a person's latest ask their record (or a stored ask history) must be kept for
    every hard limit to hold: the ask history horizon, or the longest re-ask interval allowed
    (MAX_REASK_INTERVAL_S, 30 days) if longer. Whoever forgets records or ask histories (eviction,
    a store, a session) keeps them at least this long.
    """
    return max(ask_history_horizon_s(model), MAX_REASK_INTERVAL_S)


def note_ask(record: PersonRecord, now_s: float, model: SiteModel) -> PersonRecord:
    """Remember an ask.

    Kept: every ask within `ask_history_horizon_s` (all that the daily cap and the ask load count)
    and, of the older ones, the latest while it is within MAX_REASK_INTERVAL_S; at most
    MAX_ASKS_CAP in all.

    The re-ask interval needs only the latest ask, which always stays: it is this ask or one
    stamped later (a clock that jumped back, an ask noted late), which pruning by age keeps
    as "in the future". The latest older ask stays too, so that taking one ask back (it
    could not be made) still leaves the one before it. Any allowed interval is honoured
    without keeping a month of asks in every decision document (which carries each
    candidate's remembered asks); how long a record must be kept is `ask_retention_s`.
    """
    horizon = ask_history_horizon_s(model)
    kept = [t for t in record.ask_times_s if now_s - t < horizon]
    older = [t for t in record.ask_times_s if not now_s - t < horizon]
    if older and now_s - max(older) < MAX_REASK_INTERVAL_S:
        kept.insert(0, max(older))          # older than every kept ask: order stays
    if len(kept) >= MAX_ASKS_CAP:
        # at most MAX_ASKS_CAP in all (what a decision document carries): drop the earliest
        # stamped, never the latest; with any daily cap allowed, 999 others already bind it
        kept = sorted(kept)[len(kept) - (MAX_ASKS_CAP - 1):]
    return replace(record, ask_times_s=tuple(kept) + (now_s,))


def note_outcome(record: PersonRecord, event: OutcomeEvent, model: SiteModel) -> PersonRecord:
    """Fold one more event in, the same way `fold_events` does."""
    belief, last = fold_events([event], model, record.belief, record.belief_time_s)
    return replace(record, belief=belief, belief_time_s=last)
