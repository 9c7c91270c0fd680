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

"""The life of help needs and asks, one module for node, simulator and tests (no ROS here).

Events in, one method each, time always passed in: people_seen, need_opened, need_closed,
goal_aborted / goal_finished (navigation), outcome, tick (pending asks expire, needs waiting
for the clock decide), clock (system time against the steady clock), peer_events (peers'
outcomes and asks), forgotten, outcome_saved, set_parameters. Each returns a `Step`: the
decisions to publish, the events stored here to share with the fleet, notes for the log.
Every decision goes through core.policy.decide, the one decision code path.

Rules:
- one pending ask per need; declined, no response, could not ask or an expired ask decide
  again, up to max_asks_per_need asks for the need; helped ends its asking;
- an outcome for an unknown or finished request is refused (SessionInputError names the field);
- every ask is stored before its decision is returned; if the store refuses it, nobody is
  asked (policy store_unavailable), and likewise while an outcome waits for the store;
- asks made before a restart count: the robot's own of the last hour are loaded at start, a
  person's when their record is loaded, a need's by its request id when it opens; peers'
  asks count for the per-person limits and the ask load while rules.count_peer_asks is on.
"""
from __future__ import annotations

from dataclasses import replace
from typing import Any, Iterable, Optional, Sequence

from .memory import PersonMemory
from .ports import DirectWrites, OutcomeWriter, SessionStore, StoreStatus
from .state import (
    DECISION_OTHER_BYTES,
    DecisionOut,
    IN_VIEW_EXTRA_S,
    MAX_GOAL_STATUSES,
    MAX_GOALS_REMEMBERED,
    MAX_PEOPLE_IN_VIEW,
    OpenNeed,
    PendingAsk,
    Seen,
    SessionInputError,
    SessionRules,
    Step,
    STORE_UNAVAILABLE,
)
from ..core import (
    candidate_from_record,
    conclude,
    decide,
    DecisionConfig,
    HelpNeed,
    keep_recent_asks,
    PersonRecord,
    Result,
    SiteModel,
)
from ..core.model import CoreInputError
from ..core.policy import Candidate, choose_lookahead, Chooser, Evaluation, HOUR_S
from ..core.preview import quoted
from ..store.base import AnyEvent, append_batch, AskEvent, StoredEvent
from ..store.ids import refused_by_store
from ..wire import candidate_bytes_bound, candidates_bytes_bound_quick, MAX_DOCUMENT_BYTES

CLOCK_JUMP_TOLERANCE_S = 5.0  # system time moving this much more than the steady clock
NAV_FAILURE_KIND = "navigation_failure"


def nav_request_id(goal_id: str) -> str:
    """Return the request id of the need a goal's abort opens.

    The whole goal id (a UUID as 32 hex digits from the node), so two goals never share a need.
    """
    return f"nav-{goal_id[:64]}"


def _never(ev: Evaluation) -> None:
    return None


class HelpSession:
    """Help needs, pending asks and the ask histories behind the hard limits."""

    def __init__(self, store: SessionStore, model: SiteModel, config: DecisionConfig,
                 rules: SessionRules = SessionRules(), now_s: Optional[float] = None,
                 writer: Optional[OutcomeWriter] = None, status: Optional[StoreStatus] = None,
                 chooser: Chooser = choose_lookahead, policy: str = "lookahead") -> None:
        self.store = store
        self.model, self.config, self.rules = model, config, rules
        self.writer = writer if writer is not None else DirectWrites(store)
        self.status = status if status is not None else StoreStatus()
        self.chooser, self.policy = chooser, policy
        self.robot_id = getattr(store, "robot_id", "")
        self.memory = PersonMemory(store, model, self.robot_id, rules.count_peer_asks,
                                   rules.max_people_in_memory)
        self.seen: dict[str, Seen] = {}            # perceived id -> in view
        self.needs: dict[str, OpenNeed] = {}
        self.pending: dict[str, PendingAsk] = {}   # request id -> the ask waiting for outcome
        self.robot_ask_times_s = self._stored_robot_asks(now_s)
        self.active = True                         # False: needs are kept, nothing decided
        self.decisions = 0
        self.expired_asks = 0
        self.could_not_ask = 0
        self.clock_jumps_forward = 0
        self._clock_mark: Optional[tuple[float, float]] = None   # (node time, steady time)
        self._goals: dict[str, str] = {}           # navigation goal id -> "aborted" / "done"
        self._nav_need: Optional[str] = None       # request id of the navigation-failure need
        self._newest_abort_s: Optional[float] = None   # stamp of the newest abort handled
        self.people_dropped = 0                    # people in view let go past the bound

    def _stored_robot_asks(self, now_s: Optional[float]) -> list[float]:
        """Return the robot's own asks of the last hour (all of them before a clock runs).

        The newest max_asks_per_hour in any case, as keep_recent_asks keeps them.
        """
        since = now_s - HOUR_S if now_s is not None and now_s > 0.0 else None
        found = {a.event_id: a for a in
                 self.store.asks(robot_id=self.robot_id, since_s=since)
                 + self.store.asks(robot_id=self.robot_id, limit=self.config.max_asks_per_hour)}
        return [a.time_s for a in sorted(found.values(), key=lambda a: (a.time_s, a.event_id))]

    # ------------------------------------------------------------------ inputs
    # people: wire.SeenPerson or sim.world.SeenPerson (the same fields)
    def people_seen(self, people: Iterable[Any], now_s: float, frame_id: str = "",
                    complete_view: bool = False) -> None:
        """People perceived at `now_s`.

        `complete_view`: everyone else has left (the simulator's view at a need); otherwise they
        stay until their observation is stale. However many documents bring however many people, at
        most MAX_PEOPLE_IN_VIEW stay (`_bound_seen`), so every decision has at most that many
        candidates.
        """
        if complete_view:
            self.seen.clear()
        for p in people:
            # a person still in view keeps the key hashed when they came: the same site
            # key gives the same key, and hashing each person at 30 Hz costs the most here
            held = self.seen.get(p.person_id)
            key = held.key if held is not None else self.store.key_for(p.person_id)
            self.seen[p.person_id] = Seen(p, key, now_s, frame_id)
            self.memory.saw(key, now_s)
        if len(self.seen) > MAX_PEOPLE_IN_VIEW:
            self._bound_seen(now_s)

    def _bound_seen(self, now_s: float) -> None:
        """Past MAX_PEOPLE_IN_VIEW (wire.MAX_CANDIDATES: what one decision document holds).

        Those out of view go first (older than max_observation_age_s + IN_VIEW_EXTRA_S, as at every
        tick), then those stale for a decision (older than max_observation_age_s), then the
        farthest; the rest keep their order.
        """
        fresh_s, listed_s = self.config.max_observation_age_s, \
            self.config.max_observation_age_s + IN_VIEW_EXTRA_S
        for pid in [p for p, s in self.seen.items() if now_s - s.observed_at_s > listed_s]:
            del self.seen[pid]
        if len(self.seen) <= MAX_PEOPLE_IN_VIEW:
            return
        ranked = sorted(self.seen.items(), key=lambda item: (
            now_s - item[1].observed_at_s > fresh_s, item[1].person.distance_m,
            -item[1].observed_at_s))
        keep = {pid for pid, _ in ranked[:MAX_PEOPLE_IN_VIEW]}
        self.seen = {pid: s for pid, s in self.seen.items() if pid in keep}
        self.people_dropped += len(ranked) - len(keep)

    def need_opened(self, need: HelpNeed, now_s: float) -> Step:
        if need.request_id in self.needs:
            raise SessionInputError(f"request_id: {need.request_id!r} is already open")
        step = Step()
        state = OpenNeed(need)
        try:     # asks already made for it (before a restart): request ids are unique per robot
            state.asks = len(self.store.asks(robot_id=self.robot_id, request_id=need.request_id))
            store_failed = False
        except Exception as exc:  # noqa: BLE001 - any store error: decide nothing risky
            step.notes.append(self.status.failed("read", exc))
            store_failed = True
        self.needs[need.request_id] = state
        if len(self.needs) > self.rules.max_open_needs:
            self.needs.pop(next(iter(self.needs)))
        self._decide(state, now_s, step, store_failed)
        return step

    def need_closed(self, request_id: str, how: str = "resolved") -> Step:
        step = Step()
        if self.needs.pop(request_id, None) is None:
            step.note("info", "unknown_request",
                      f"{how} for unknown or finished request {quoted(request_id)}")
        return step

    def navigation_status(self, goals: Sequence[tuple[str, str, float]], now_s: float) -> Step:
        """One status array of a navigation action.

        (goal id, status, accepted-at stamp, s) with status "aborted", "succeeded", "canceled" or
        anything else (ignored).

        Bounded whatever the array holds: only its last MAX_GOAL_STATUSES entries are looked
        at, and only its newest aborted goal (by stamp, then position) may open a need, so
        one array gives at most one decision.
        """
        step = Step()
        newest = None
        for i, (goal_id, status, stamp_s) in enumerate(goals[-MAX_GOAL_STATUSES:]):
            if status == "aborted":
                if newest is None or (stamp_s, i) >= newest[1:]:
                    newest = (goal_id, stamp_s, i)
            elif status in ("succeeded", "canceled"):
                step.extend(self.goal_finished(goal_id))
        if newest is not None:
            step.extend(self.goal_aborted(newest[0], now_s, newest[1]))
        return step

    def goal_aborted(self, goal_id: str, now_s: float, stamp_s: Optional[float] = None) -> Step:
        """Return a navigation goal aborted.

        a help need of kind navigation_failure, once per goal, and at most one open at a time. A
        newer abort replaces the open one unless an ask for it is out (the robot is asking for help
        with its navigation already; the outcome decides again). An abort stamped before one
        already handled is history.
        """
        step = Step()
        if self._goals.get(goal_id) == "aborted":
            return step
        self._goals[goal_id] = "aborted"
        self._bound_goals()
        if stamp_s is not None:
            if self._newest_abort_s is not None and stamp_s < self._newest_abort_s:
                return step
            self._newest_abort_s = stamp_s
        old = self._nav_need
        if old is not None and old in self.needs:
            if old in self.pending:
                return step
            del self.needs[old]
        rid = nav_request_id(goal_id)
        self._nav_need = rid
        if rid not in self.needs:
            step = self.need_opened(HelpNeed(rid, NAV_FAILURE_KIND, now_s), now_s)
        return step

    def goal_finished(self, goal_id: str) -> Step:
        """Succeeded or cancelled: the need an abort of this goal opened is resolved."""
        step = Step()
        if self._goals.get(goal_id) == "aborted":
            step = self.need_closed(nav_request_id(goal_id), "resolved")
        self._goals[goal_id] = "done"
        self._bound_goals()
        return step

    def _bound_goals(self) -> None:
        while len(self._goals) > MAX_GOALS_REMEMBERED:
            self._goals.pop(next(iter(self._goals)))

    def outcome(self, request_id: str, person_id: str, result: Result | str,
                now_s: float) -> Step:
        """Return what happened to the pending ask of `request_id`; refused when there is none."""
        ask = self.pending.get(request_id)
        if ask is None:
            raise SessionInputError(f"request_id: no pending ask for {request_id[:64]!r}")
        if ask.person_id != person_id:
            raise SessionInputError(f"person_id: the pending ask of {ask.request_id!r} "
                                    f"went to another person")
        try:
            result = result if isinstance(result, Result) else Result.parse(str(result))
        except CoreInputError as exc:
            raise SessionInputError(str(exc)) from None
        del self.pending[request_id]
        step = Step()
        if result is Result.COULD_NOT_ASK:
            self.could_not_ask += 1
            self.memory.withdraw_ask(ask.key, ask.asked_at_s)
            step.note("info", "could_not_ask",
                      f"could not ask for {request_id!r}: no belief change")
        else:
            event = StoredEvent(event_id=self.store.next_event_id(), person_key=ask.key,
                                time_s=ask.asked_at_s, result=result, busyness=ask.busyness,
                                ask_load=ask.ask_load, request_kind=ask.kind)
            if self._write_outcome(event, step):
                step.share.append(event)
        state = self.needs.get(request_id)
        if state is not None:
            if result is Result.HELPED:
                state.served = True
            else:
                self._decide(state, now_s, step)
        return step

    def _write_outcome(self, event: StoredEvent, step: Step) -> bool:
        """Store first, then learn: the belief is the store's fold of the person's events."""
        try:
            stored = self.writer.write(event)
        except Exception as exc:  # noqa: BLE001 - disk full, read-only, I/O error
            step.notes.append(self.status.failed("append", exc))
            return False
        if stored is None:        # kept behind outcomes the store refused earlier
            return False
        self.status.wrote(self.store)
        if stored:
            self.memory.refresh_belief(event.person_key)
        return bool(stored)

    def outcome_saved(self, event: StoredEvent) -> None:
        """Note that an outcome the store refused earlier is stored now (the writer's retry)."""
        self.memory.refresh_belief(event.person_key)

    def peer_events(self, events: list[AnyEvent]) -> list[AnyEvent]:
        """Peers' outcomes and asks: stored as one batch, then learned from.

        A write that fails raises, so the caller keeps the batch and tries again (the store
        refusing writes), or finds the events it cannot hold and drops them (store.ids
        refused_by_store tells the two apart; only the first marks the store failing).
        """
        try:
            stored = append_batch(self.store, events)
        except Exception as exc:
            if refused_by_store(exc):
                self.status.failed("append (fleet events)", exc)
            raise
        self.status.wrote(self.store)
        for key in {e.person_key for e in stored if isinstance(e, StoredEvent)}:
            try:
                self.memory.refresh_belief(key)
            except Exception:  # noqa: BLE001 - stored; the record reloads when next needed
                self.memory.drop(key)
        self.memory.note_peer_asks(e for e in stored if isinstance(e, AskEvent))
        return stored

    def forgotten(self, key: str) -> None:
        """Note that the store has forgotten a person.

        Drop their record, any pending ask and any outcome still kept for a store that refused it.
        """
        self.memory.forget(key)
        self.writer.drop_person(key)
        self.pending = {r: a for r, a in self.pending.items() if a.key != key}

    # ------------------------------------------------------------------ time
    def clock(self, now_s: float, steady_s: Optional[float]) -> Step:
        """Return the driver's clock reading.

        On system time (`steady_s` given), a jump forward (an NTP step, a clock set by hand) would
        age every remembered ask at once and reopen the hourly cap, the re-ask interval and the
        daily cap. The steady clock says how much time really passed: everything kept in node time
        moves forward with the jump, in memory and in the store, so each ask keeps its real age
        after a restart too. Sim time (`steady_s` None) is the truth, and a jump back is already
        safe (asks 'in the future' count as recent), so neither is touched.
        """
        step = Step()
        mark = self._clock_mark
        self._clock_mark = None if steady_s is None else (now_s, steady_s)
        if mark is None or steady_s is None:
            return step
        jump = (now_s - mark[0]) - (steady_s - mark[1])
        if jump <= CLOCK_JUMP_TOLERANCE_S:
            return step
        self.clock_jumps_forward += 1
        step.note("warning", "clock_jump", f"system time jumped {jump:.0f} s ahead of the "
                  "steady clock: remembered asks moved with it, so the limits count real time")
        self.robot_ask_times_s = [t + jump for t in self.robot_ask_times_s]
        self.memory.move_asks_forward(jump)
        try:
            self.store.move_asks_forward(jump)
        except Exception as exc:  # noqa: BLE001 - memory has moved; say the store did not
            step.notes.append(self.status.failed("moving asks after a clock jump", exc))
        for rid, ask in self.pending.items():
            self.pending[rid] = replace(ask, asked_at_s=ask.asked_at_s + jump,
                                        expires_at_s=ask.expires_at_s + jump)
        for seen in self.seen.values():
            if seen.observed_at_s <= mark[0]:     # seen before the jump (not since)
                seen.observed_at_s += jump
        return step

    def tick(self, now_s: float) -> Step:
        """Housekeeping: expire pending asks (and decide again).

        Decide the needs that waited for the clock, drop people out of view, bound the records in
        memory.
        """
        step = Step()
        if now_s <= 0.0:
            return step
        for rid, ask in list(self.pending.items()):
            if now_s >= ask.expires_at_s:
                del self.pending[rid]
                self.expired_asks += 1
                step.note("info", "ask_expired",
                          f"ask for {rid!r} expired without outcome: no belief change")
                state = self.needs.get(rid)
                if state is not None:
                    self._decide(state, now_s, step)
        for state in list(self.needs.values()):
            if state.waiting_for_clock:
                self._decide(state, now_s, step)
        limit = self.config.max_observation_age_s + IN_VIEW_EXTRA_S
        for pid in [p for p, s in self.seen.items() if now_s - s.observed_at_s > limit]:
            del self.seen[pid]
        keep = {s.key for s in self.seen.values()} | {a.key for a in self.pending.values()}
        self.memory.evict_if_needed(now_s, keep, self.config)
        return step

    def set_parameters(self, model: SiteModel, config: DecisionConfig,
                       rules: SessionRules) -> None:
        self.model, self.config, self.rules = model, config, rules
        self.memory.use_model(model)
        self.memory.use_peer_rule(rules.count_peer_asks)

    @property
    def outcomes_waiting(self) -> int:
        return self.writer.waiting

    # ------------------------------------------------------------------ the decision
    def _decide(self, state: OpenNeed, now_s: float, step: Step,
                store_failed: bool = False) -> None:
        if not self.active or state.served or state.need.request_id in self.pending:
            return   # one ask at a time per need; the outcome or expiry decides again
        if now_s <= 0.0:   # sim time before /clock: never decide on time zero
            state.waiting_for_clock = True
            return
        if state.need.opened_at_s <= 0.0:
            state.need = replace(state.need, opened_at_s=now_s)
        state.waiting_for_clock = False
        model, config = self.model, self.config
        horizon = config.max_observation_age_s + IN_VIEW_EXTRA_S
        cands, keys, read = [], [], []
        record_for, is_opted_out = self.memory.record_for, self.store.is_opted_out
        for pid, s in self.seen.items():
            if now_s - s.observed_at_s > horizon:
                continue
            key, person = s.key, s.person
            try:
                rec = record_for(key)
                opted_out = is_opted_out(key)
                read.append(key)
            except Exception as exc:  # noqa: BLE001 - a store that cannot be read: nobody asked
                step.notes.append(self.status.failed("read", exc))
                store_failed, rec, opted_out = True, PersonRecord.new(model), True
            cands.append(candidate_from_record(
                pid, rec, now_s, model, person.distance_m, s.observed_at_s,
                busyness=person.busyness, activity=person.activity, opted_out=opted_out))
            keys.append(key)
        kept = self._within_one_document(cands)
        if kept is not None:
            cands, keys = [cands[i] for i in kept], [keys[i] for i in kept]
            kept_keys = set(keys)
            read = [k for k in read if k in kept_keys]
        why = ("asking_disabled" if not self.rules.asking_enabled
               else STORE_UNAVAILABLE if store_failed or self.writer.waiting
               else "need_ask_limit" if state.asks >= self.rules.max_asks_per_need else None)
        if why is not None:
            decision = decide(state.need, cands, now_s, self.robot_ask_times_s, model, config,
                              chooser=_never, policy=why)
        else:
            decision = decide(state.need, cands, now_s, self.robot_ask_times_s, model, config,
                              chooser=self.chooser, policy=self.policy)
        # the newest max_asks_per_hour asks are always kept: a clock excursion far ahead must
        # not empty the memory that the hourly cap counts on when the clock comes back
        robot_asks = keep_recent_asks(self.robot_ask_times_s, now_s, HOUR_S,
                                      config.max_asks_per_hour)
        ask = None
        if decision.action == "ask":
            assert decision.person_index is not None   # an ask always names its person
            ask = self._store_ask(keys[decision.person_index], state.need, now_s, step)
            if ask is None:       # not stored, so not made: nobody is asked
                decision = conclude(decision.evaluation, None, STORE_UNAVAILABLE)
        self.decisions += 1
        # a candidate once per need, however often it is decided
        fresh = [k for k in dict.fromkeys(read) if k not in state.candidates]
        state.candidates.update(fresh)
        self.memory.note_candidates(fresh, now_s)
        if ask is not None:
            i = decision.person_index
            assert i is not None and decision.person_id is not None
            ev = decision.evaluation
            self.memory.note_ask(ask.person_key, now_s)
            self.robot_ask_times_s = list(robot_asks) + [now_s]
            state.asks += 1
            self.pending[state.need.request_id] = PendingAsk(
                state.need.request_id, decision.person_id, ask.person_key, now_s,
                float(ev.busyness[i]), float(ev.ask_load[i]), state.need.kind,
                now_s + self.rules.pending_ask_timeout_s)
            step.share.append(ask)
        step.decisions.append(DecisionOut(decision, tuple(robot_asks), ask))

    def _within_one_document(self, cands: list[Candidate]) -> Optional[list[int]]:
        """None when every candidate fits in one decision document.

        Else the indices (in order) of the nearest that do: at most wire.MAX_CANDIDATES, and within
        the bytes MAX_DOCUMENT_BYTES leaves for candidates (wire.candidate_bytes_bound: long
        unicode ids and many remembered asks make a candidate large), so every decision published
        is valid by its own schema and can be replayed.
        """
        budget = MAX_DOCUMENT_BYTES - DECISION_OTHER_BYTES
        if len(cands) <= MAX_PEOPLE_IN_VIEW and candidates_bytes_bound_quick(cands) <= budget:
            return None                      # the usual case: lengths alone show it fits
        sizes = [candidate_bytes_bound(c) for c in cands]
        if len(cands) <= MAX_PEOPLE_IN_VIEW and sum(sizes) <= budget:
            return None
        nearest = sorted(range(len(cands)), key=lambda i: (cands[i].distance_m,
                                                           -cands[i].observed_at_s, i))
        kept, used = [], 0
        for i in nearest[:MAX_PEOPLE_IN_VIEW]:
            if used + sizes[i] > budget:
                break
            kept.append(i)
            used += sizes[i]
        self.people_dropped += len(cands) - len(kept)
        return sorted(kept)

    def _store_ask(self, key: str, need: HelpNeed, now_s: float,
                   step: Step) -> Optional[AskEvent]:
        """Write the ask durably before anyone hears of it.

        None when the store did not take it (refused, or the person opted out meanwhile).
        """
        ask = AskEvent(self.store.next_event_id(), key, now_s, need.kind, need.request_id)
        try:
            stored = self.store.append_asks([ask])
        except Exception as exc:  # noqa: BLE001 - disk full, read-only, I/O error
            step.notes.append(self.status.failed("append (ask)", exc))
            return None
        self.status.wrote(self.store)
        if not stored:
            step.note("warning", "ask_not_taken", f"the store did not take the ask for "
                      f"{need.request_id!r} (opted out meanwhile?): nobody asked")
            return None
        return ask
