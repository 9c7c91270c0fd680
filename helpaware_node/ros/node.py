"""The decision node: people, help needs and outcomes in; decisions, markers, diagnostics out.

Topics (relative names, so namespaces and remaps work; the fleet and privacy topics are
site-wide, absolute by default: parameters fleet_topic and privacy_topic):
  in  people       std_msgs/String (wire `people`), sensor-data QoS (best effort, depth 5)
  in  task_status  std_msgs/String (wire `task_status`), reliable, depth 1000
  in  outcome      std_msgs/String (wire `outcome`), reliable, depth 1000
  in  <navigation_status_topic> action_msgs/GoalStatusArray (when the parameter is set)
  out decision     std_msgs/String (wire `decision`), reliable, depth 50
  out markers      visualization_msgs/MarkerArray
  out /diagnostics diagnostic_msgs/DiagnosticArray, about 1 Hz
  in+out <fleet_topic> (default /helpaware/fleet) signed fleet documents (ros/fleet.py)
  in  <privacy_topic> (default /helpaware/privacy_request) signed requests (ros/privacy.py)
Every decision goes through core.policy.decide; every outcome becomes a StoredEvent appended to
the store before the belief changes (`_ingest_event`; peers' events in batches through
`_ingest_fleet_events`).
"""
from __future__ import annotations

import sys
import time
from dataclasses import dataclass, replace
from typing import Optional

import rclpy
from rclpy._rclpy_pybind11 import RCLError
from rclpy.executors import ExternalShutdownException, SingleThreadedExecutor
from rclpy.lifecycle import LifecycleNode, LifecycleState, TransitionCallbackReturn
from rclpy.qos import QoSProfile, ReliabilityPolicy, qos_profile_sensor_data
from std_msgs.msg import String

from .. import wire
from ..core import (HelpNeed, PersonRecord, Result, candidate_from_record, decide,
                    keep_recent_asks, note_ask, note_candidate)
from ..core.model import CoreInputError
from ..store import StoredEvent, default_store_path, open_store
from . import diagnostics as diag
from . import markers as mk
from .fleet import FleetLink, PrivacyRequests
from .params import NodeParameters
from .shm_files import StartupSweep                  # issue 19

NODE_NAME = "helpaware_decider"
NAV_FAILURE_KIND = "navigation_failure"
RELIABLE = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE)
# inputs that must not be lost in a burst while a long callback holds the executor: a
# KEEP_LAST reader overwrites the oldest unread message silently (depth is not part of QoS
# matching, so publishers with any depth still connect)
INPUT_QUEUE = QoSProfile(depth=1000, reliability=ReliabilityPolicy.RELIABLE)
IN_VIEW_EXTRA_S = 5.0          # people stay listed (and marked) a little past the staleness limit
HOUSEKEEPING_PERIOD_S = 0.5
HOUR_S = 3600.0
MAX_UNSAVED_EVENTS = 10_000    # outcomes held in memory while the store refuses writes
STORE_UNAVAILABLE = "store_unavailable"   # decision policy while outcomes cannot be saved
CLOCK_JUMP_TOLERANCE_S = 5.0  # system time moving this much more than the steady clock
MAX_PEOPLE_IN_MEMORY = 20_000  # person records kept in memory; beliefs stay in the store


class StartupError(RuntimeError):
    """The node cannot start (refused parameters, store unavailable)."""


MEMORY_STORE = "memory"   # store_path value for a store that lives only in this process


@dataclass
class Seen:
    person: wire.SeenPerson
    key: str
    observed_at_s: float
    frame_id: str


@dataclass
class OpenNeed:
    need: HelpNeed
    asks: int = 0
    served: bool = False          # someone helped: no further decisions for it
    waiting_for_clock: bool = False


@dataclass
class PendingAsk:
    request_id: str
    person_id: str
    key: str
    asked_at_s: float
    busyness: float
    ask_load: float
    kind: str
    expires_at_s: float


def _never(ev) -> None:
    return None


class HelpAwareNode(LifecycleNode):
    """Decides at each help need whether to ask a nearby person, and whom."""

    def __init__(self, node_name: str = NODE_NAME, **kwargs) -> None:
        try:
            super().__init__(node_name, **kwargs)
        except rclpy.exceptions.ParameterException as exc:   # e.g. use_sim_time: 1 in a file
            raise StartupError(f"parameters refused: {exc}") from exc
        self.store = None
        self.records: dict[str, PersonRecord] = {}
        self.max_records = MAX_PEOPLE_IN_MEMORY
        self.records_evicted = 0
        self._last_seen_s: dict[str, float] = {}     # person key -> when last in view
        self._clock_mark: Optional[tuple[float, float]] = None   # (node time, steady time)
        self.clock_jumps_forward = 0
        try:
            self.params = NodeParameters(self, on_change=self._on_parameters_changed)
        except (CoreInputError, rclpy.exceptions.ParameterException) as exc:
            raise StartupError(f"parameters refused: {exc}") from exc
        self.counters = diag.InputCounters()
        self.store_ok = True
        self.store_error = ""
        # outcomes the store refused (disk full, read-only): kept in order and retried; while
        # any are held the node asks nobody, so it never acts on beliefs it could not save
        self.unsaved: list[StoredEvent] = []
        self._unsaved_own: set[str] = set()     # ids of held outcomes made here: shared once saved
        self.unsaved_dropped = 0
        self.seen: dict[str, Seen] = {}
        self.needs: dict[str, OpenNeed] = {}
        self.pending: dict[str, PendingAsk] = {}
        self.robot_ask_times_s: list[float] = []
        self.last_action: dict[str, str] = {}        # perceived id -> "asked"/"passed over"
        self.decisions_published = 0
        self.expired_asks = 0
        self.could_not_ask = 0
        self.last_decision: Optional[dict] = None
        self._nav_handled: dict[str, str] = {}
        self._marker_ids = mk.MarkerIds()
        self._marked: set[str] = set()
        self._beliefs_model = None
        self._active = False
        self._entities = []
        self._configure_error = ""
        if self.params.settings.autostart:
            self.trigger_configure()
            if not self._entities:
                # started on its own (no lifecycle manager to retry): exit with the reason
                # rather than stay up unconfigured and silently decide nothing
                self.destroy_node()
                raise StartupError(f"{self._configure_error}; not started (autostart: a "
                                   f"managed node, autostart:=false, would stay unconfigured "
                                   f"for its manager instead)")
            self.trigger_activate()

    @property
    def _store_file(self) -> str:
        """store_path resolved: empty means the default file under the ROS home."""
        return resolve_store_path(self.params.settings.store_path)

    # ---------------------------------------------------------------- lifecycle
    def on_configure(self, state: LifecycleState) -> TransitionCallbackReturn:
        s = self.params.settings
        try:
            self.store = open_store(self._store_file, s.robot_id, model=self.params.model)
        except Exception as exc:  # an unreadable store must not start a node that forgets
            self._configure_error = f"store {self._store_file or '(memory)'} could not open: {exc}"
            self.get_logger().error(self._configure_error)
            return TransitionCallbackReturn.FAILURE
        self._beliefs_model = self.params.model
        health = getattr(self.store, "health", None)
        if health is not None and health.level != "OK":   # e.g. a damaged file moved aside
            self.store_ok, self.store_error = False, health.message[:200]
            self.get_logger().error(health.message)
        try:
            self._create_entities(s)
        except Exception as exc:   # the lifecycle machinery would swallow it without a word
            self._configure_error = f"configure failed: {type(exc).__name__}: {exc}"
            self.get_logger().error(self._configure_error)
            self._teardown()
            return TransitionCallbackReturn.FAILURE
        self.get_logger().info(f"configured: store {self._store_file or '(memory)'}, "
                               f"params {self.params_hash()}")
        return TransitionCallbackReturn.SUCCESS

    def _create_entities(self, s) -> None:
        """Publishers, subscriptions, timers, fleet link and privacy requests (configure)."""
        from rclpy.event_handler import SubscriptionEventCallbacks, PublisherEventCallbacks
        sub_events = SubscriptionEventCallbacks(incompatible_qos=self._on_qos_incompatible)
        pub_events = PublisherEventCallbacks(incompatible_qos=self._on_qos_incompatible)
        self.decision_pub = self.create_publisher(String, "decision", RELIABLE,
                                                  event_callbacks=pub_events)
        from visualization_msgs.msg import MarkerArray
        from diagnostic_msgs.msg import DiagnosticArray
        self.marker_pub = self.create_publisher(MarkerArray, "markers", 10)
        self.diag_pub = self.create_publisher(DiagnosticArray, "/diagnostics", 10)
        subs = [
            self.create_subscription(String, "people", self._on_people, qos_profile_sensor_data,
                                     event_callbacks=sub_events),
            self.create_subscription(String, "task_status", self._on_task_status, INPUT_QUEUE,
                                     event_callbacks=sub_events),
            self.create_subscription(String, "outcome", self._on_outcome, INPUT_QUEUE,
                                     event_callbacks=sub_events),
        ]
        if s.navigation_status_topic:
            from action_msgs.msg import GoalStatusArray
            subs.append(self.create_subscription(GoalStatusArray, s.navigation_status_topic,
                                                 self._on_navigation_status, 10,
                                                 event_callbacks=sub_events))
        self.input_watch = diag.WatchedInputs(      # input watchdog (issue 19)
            {"people": subs[0], "task_status": subs[1]}, self.get_logger(), self.steady_s())
        timers = [self.create_timer(s.diagnostics_period_s, self._publish_status),
                  self.create_timer(HOUSEKEEPING_PERIOD_S, self._housekeeping)]
        self._entities = subs + timers + [self.decision_pub, self.marker_pub, self.diag_pub]
        # fleet documents in and out, and live opt-out/forget on privacy_request (docs/store.md)
        # [signed-fleet] topics and the unsigned-request switch come from parameters
        self.fleet = FleetLink(self, self.store, append_many=self._ingest_fleet_events,
                               on_forgotten=self._forget_in_memory, topic=s.fleet_topic)
        self.privacy = PrivacyRequests(self, self.store, self.fleet, lambda action, key: (
            self._forget_in_memory(key) if action == "forget" else None),
            topic=s.privacy_topic, allow_unsigned=s.allow_unsigned_privacy_requests)
        self._entities += self.fleet.entities + [self.privacy._sub]

    def on_activate(self, state: LifecycleState) -> TransitionCallbackReturn:
        self._active = True
        return TransitionCallbackReturn.SUCCESS

    def on_deactivate(self, state: LifecycleState) -> TransitionCallbackReturn:
        self._active = False
        return TransitionCallbackReturn.SUCCESS

    def on_cleanup(self, state: LifecycleState) -> TransitionCallbackReturn:
        self._teardown()
        return TransitionCallbackReturn.SUCCESS

    def on_shutdown(self, state: LifecycleState) -> TransitionCallbackReturn:
        self._teardown()
        return TransitionCallbackReturn.SUCCESS

    def _teardown(self) -> None:
        self._active = False
        fleet = getattr(self, "fleet", None)
        if fleet is not None and self.store is not None:
            try:
                fleet.flush()          # peers' events received but not yet stored
            except Exception:  # noqa: BLE001 - a failing store: peers offer them again
                pass
        self._report_unsaved()
        for e in self._entities:
            try:
                if hasattr(e, "cancel"):
                    self.destroy_timer(e)
                elif hasattr(e, "publish"):
                    self.destroy_publisher(e)
                else:
                    self.destroy_subscription(e)
            except Exception:  # already gone at shutdown
                pass
        self._entities = []
        if self.store is not None:
            self.store.close()
            self.store = None

    def _report_unsaved(self) -> None:
        if getattr(self, "unsaved", None):   # what a stop while the store refuses writes costs
            # (getattr: destroy_node also runs for a node whose parameters were refused)
            self.get_logger().error(f"stopping with {len(self.unsaved)} outcome(s) the store "
                                    f"refused ({self.store_error}); they are not saved")
            self.unsaved, self._unsaved_own = [], set()

    def destroy_node(self) -> None:
        self._report_unsaved()
        if self.store is not None:
            self.store.close()
            self.store = None
        super().destroy_node()

    # ---------------------------------------------------------------- helpers
    def now_s(self) -> float:
        return self.get_clock().now().nanoseconds * 1e-9

    @staticmethod
    def steady_s() -> float:
        return time.monotonic()

    def _follow_clock_jump(self, now: float) -> None:
        """On system time, a jump forward (an NTP step, a clock set by hand) would age every
        remembered ask at once and reopen the hourly cap, the re-ask interval and the daily
        cap. The steady clock says how much time really passed: everything the node keeps in
        node time moves forward with the jump, so each ask keeps its real age. Sim time is
        the truth when it is used, and a jump back is already safe (asks 'in the future'
        count as recent), so neither is touched."""
        steady = self.steady_s()
        mark, self._clock_mark = self._clock_mark, (now, steady)
        if mark is None or self.get_clock().ros_time_is_active:
            return
        jump = (now - mark[0]) - (steady - mark[1])
        if jump <= CLOCK_JUMP_TOLERANCE_S:
            return
        self.clock_jumps_forward += 1
        self.get_logger().warning(f"system time jumped {jump:.0f} s ahead of the steady clock: "
                                  f"remembered asks moved with it, so the limits count real time")
        self.robot_ask_times_s = [t + jump for t in self.robot_ask_times_s]
        for key, rec in self.records.items():
            if rec.ask_times_s:
                moved = tuple(t + jump for t in rec.ask_times_s)
                self.records[key] = replace(rec, ask_times_s=moved)
        for rid, ask in self.pending.items():
            self.pending[rid] = replace(ask, asked_at_s=ask.asked_at_s + jump,
                                        expires_at_s=ask.expires_at_s + jump)
        for seen in self.seen.values():
            if seen.observed_at_s <= mark[0]:     # seen before the jump (not since)
                seen.observed_at_s += jump

    def params_hash(self) -> str:
        from ..core import params_hash
        return params_hash(self.params.model, self.params.config)

    def _reject(self, topic: str, reason: str) -> None:
        self.counters.reject(topic, reason)
        self.get_logger().warning(f"rejected {topic}: {reason[:200]}",
                                  throttle_duration_sec=1.0)

    def _on_qos_incompatible(self, event) -> None:
        self.counters.qos_incompatible += 1
        self.get_logger().warning(f"incompatible QoS: {event}", throttle_duration_sec=5.0)

    def _on_parameters_changed(self) -> None:
        # the belief of each person is the fold of their events under the model in force
        if self.store is not None and self._beliefs_model != self.params.model:
            self._beliefs_model = self.params.model
            for key, rec in list(self.records.items()):
                belief, t = self.store.belief(key, self.params.model)
                self.records[key] = replace(rec, belief=belief, belief_time_s=t)

    def record_for(self, key: str) -> PersonRecord:
        rec = self.records.get(key)
        if rec is None:
            rec = PersonRecord.new(self.params.model)
            if self.store is not None and self.store.events_for(key):
                belief, t = self.store.belief(key, self.params.model)
                rec = replace(rec, belief=belief, belief_time_s=t)
            self.records[key] = rec
        return rec

    def opted_out_keys(self) -> list[str]:
        """Keys on the store's opt-out list among the people this node knows."""
        if self.store is None:
            return []
        if hasattr(self.store, "opted_out"):      # the store keeps the full list
            return sorted(self.store.opted_out())
        if hasattr(self.store, "_opted_out"):     # MemoryStore
            return sorted(self.store._opted_out)
        keys = set(self.records) | set(self.store.keys()) | {s.key for s in self.seen.values()}
        return sorted(k for k in keys if self.store.is_opted_out(k))

    # ---------------------------------------------------------------- inputs
    def _on_people(self, msg: String) -> None:
        self.counters.received["people"] += 1
        self.input_watch.note("people", self.steady_s())           # input watchdog (issue 19)
        try:
            doc = wire.decode("people", msg.data)
            people = wire.people_from(doc)
        except (wire.WireError, CoreInputError) as exc:
            self._reject("people", str(exc))
            return
        now = self.now_s()
        frame = doc.get("frame_id", "") or "base_link"
        for p in people:
            key = self.store.key_for(p.person_id) if self.store is not None else ""
            self.seen[p.person_id] = Seen(p, key, now, frame)
            self._last_seen_s[key] = now

    def _on_task_status(self, msg: String) -> None:
        self.counters.received["task_status"] += 1
        self.input_watch.note("task_status", self.steady_s())      # input watchdog (issue 19)
        try:
            doc = wire.decode("task_status", msg.data)
            rid = doc["request_id"]
            if doc["state"] == "open":
                if rid in self.needs:
                    raise wire.WireError(f"request_id: {rid!r} is already open")
                need = wire.help_need_from(doc, self.now_s())
        except (wire.WireError, CoreInputError) as exc:
            self._reject("task_status", str(exc))
            return
        if doc["state"] == "open":
            self.open_need(need)
        else:
            self.close_need(rid, doc["state"])

    def open_need(self, need: HelpNeed) -> None:
        state = OpenNeed(need)
        self.needs[need.request_id] = state
        if len(self.needs) > 1000:   # a behaviour layer that never resolves: drop the oldest
            self.needs.pop(next(iter(self.needs)))
        self._decide(state)

    def close_need(self, request_id: str, how: str) -> None:
        if self.needs.pop(request_id, None) is None:
            self.get_logger().info(f"{how} for unknown or finished request {request_id!r}")

    def _on_outcome(self, msg: String) -> None:
        self.counters.received["outcome"] += 1
        try:
            doc = wire.decode("outcome", msg.data)
            ask = self.pending.get(doc["request_id"])
            if ask is None:
                raise wire.WireError(f"request_id: no pending ask for {doc['request_id'][:64]!r}")
            if ask.person_id != doc["person_id"]:
                raise wire.WireError(f"person_id: the pending ask of {ask.request_id!r} "
                                     f"went to another person")
            result = Result.parse(doc["result"])
        except (wire.WireError, CoreInputError) as exc:
            self._reject("outcome", str(exc))
            return
        del self.pending[ask.request_id]
        if result is Result.COULD_NOT_ASK:
            self.could_not_ask += 1
            rec = self.records.get(ask.key)
            if rec is not None:   # the ask never reached them: it adds no ask load either
                times = list(rec.ask_times_s)
                if ask.asked_at_s in times:
                    times.remove(ask.asked_at_s)
                self.records[ask.key] = replace(rec, ask_times_s=tuple(times))
            self.get_logger().info(f"could not ask for {ask.request_id!r}: no belief change")
        else:
            event = StoredEvent(event_id=self.store.next_event_id(), person_key=ask.key,
                                time_s=ask.asked_at_s, result=result, busyness=ask.busyness,
                                ask_load=ask.ask_load, request_kind=ask.kind)
            if self.unsaved:       # the store is refusing writes: wait behind the others
                self._hold_unsaved(event, own=True)
            elif self._ingest_event(event, hold_on_failure=True, own=True):
                self._share(event)
        need = self.needs.get(ask.request_id)
        if need is not None:
            if result is Result.HELPED:
                need.served = True
            else:
                self._decide(need)

    def _ingest_event(self, event: StoredEvent, hold_on_failure: bool = False,
                      own: bool = False) -> bool:
        """Store first, then learn: the belief is the store's fold of the person's events.

        Local outcomes come through here; a duplicate or opted-out event is not stored and
        changes nothing. When the store refuses the write (disk full,
        read-only, I/O error) the belief is unchanged and, with `hold_on_failure`, the event
        is held for retry; `own` marks an outcome made here, shared with the fleet once saved.
        """
        try:
            stored = self.store.append(event)
        except Exception as exc:
            self._store_failed("append", exc)
            if hold_on_failure:
                self._hold_unsaved(event, own)
            return False
        health = getattr(self.store, "health", None)
        self.store_ok = health is None or health.level == "OK"
        if not stored:
            return False
        rec = self.records.get(event.person_key) or PersonRecord.new(self.params.model)
        belief, t = self.store.belief(event.person_key, self.params.model)
        self.records[event.person_key] = replace(rec, belief=belief, belief_time_s=t)
        return True

    def _store_failed(self, what: str, exc: Exception) -> None:
        self.store_ok = False
        self.store_error = f"{what}: {exc}"[:200]
        self.get_logger().error(f"store {self._store_file or '(memory)'} refused {what} ({exc}); "
                                f"belief unchanged, outcomes kept and retried, nobody asked "
                                f"while one waits (check free disk space and that the file "
                                f"is writable)", throttle_duration_sec=5.0)

    def _ingest_fleet_events(self, events: list[StoredEvent]) -> list[StoredEvent]:
        """A batch of peers' events: one transaction, then each touched belief once. A store
        that refuses raises, and the fleet link keeps the batch queued and tries again (peer
        events are never shared again from here: each peer shares its own)."""
        try:
            if hasattr(self.store, "append_many"):
                stored = self.store.append_many(events)
            else:
                stored = [e for e in events if self.store.append(e)]
        except Exception as exc:
            self._store_failed("append (fleet events)", exc)
            raise
        health = getattr(self.store, "health", None)
        self.store_ok = health is None or health.level == "OK"
        for key in {e.person_key for e in stored}:
            rec = self.records.get(key) or PersonRecord.new(self.params.model)
            belief, t = self.store.belief(key, self.params.model)
            self.records[key] = replace(rec, belief=belief, belief_time_s=t)
        return stored

    def _hold_unsaved(self, event: StoredEvent, own: bool) -> None:
        if len(self.unsaved) >= MAX_UNSAVED_EVENTS:   # bounded memory: the oldest goes
            self._unsaved_own.discard(self.unsaved.pop(0).event_id)
            self.unsaved_dropped += 1
            self.get_logger().error(f"{MAX_UNSAVED_EVENTS} outcomes wait for the store: the "
                                    f"oldest is dropped ({self.unsaved_dropped} so far)",
                                    throttle_duration_sec=10.0)
        self.unsaved.append(event)
        if own:
            self._unsaved_own.add(event.event_id)

    def _share(self, event: StoredEvent) -> None:
        if getattr(self, "fleet", None) is not None:
            self.fleet.publish(event)      # shared only once durable here

    def _retry_unsaved(self) -> None:
        """Write held outcomes in order; stop at the first refusal and keep the rest."""
        while self.unsaved and self.store is not None:
            event = self.unsaved[0]
            try:
                stored = self.store.append(event)
            except Exception as exc:
                self._store_failed("append (retry)", exc)
                return
            self.unsaved.pop(0)
            own = event.event_id in self._unsaved_own
            self._unsaved_own.discard(event.event_id)
            if stored:      # False: opted out meanwhile, or already there
                belief, t = self.store.belief(event.person_key, self.params.model)
                rec = self.records.get(event.person_key) or PersonRecord.new(self.params.model)
                self.records[event.person_key] = replace(rec, belief=belief, belief_time_s=t)
                if own:
                    self._share(event)
        if self.store is not None:
            health = getattr(self.store, "health", None)
            self.store_ok = health is None or health.level == "OK"
            self.get_logger().info("store accepts writes again: held outcomes saved, "
                                   "asking resumes")

    @property
    def asking_paused_for_store(self) -> bool:
        return bool(self.unsaved)

    def _forget_in_memory(self, key: str) -> None:
        """The store has forgotten a person: drop their record, any pending ask and any
        outcome still held for a store that refused it."""
        self.records.pop(key, None)
        self._last_seen_s.pop(key, None)
        self.unsaved = [e for e in self.unsaved if e.person_key != key]
        self._unsaved_own &= {e.event_id for e in self.unsaved}
        self.pending = {r: a for r, a in self.pending.items() if a.key != key}

    def _on_navigation_status(self, msg) -> None:
        from action_msgs.msg import GoalStatus
        self.counters.received["navigation_status"] += 1
        try:
            for st in msg.status_list:
                gid = bytes(st.goal_info.goal_id.uuid).hex()
                rid = f"nav-{gid[:12]}"
                if st.status == GoalStatus.STATUS_ABORTED:
                    if self._nav_handled.get(gid) != "aborted":
                        self._nav_handled[gid] = "aborted"
                        if rid not in self.needs:
                            self.open_need(HelpNeed(rid, NAV_FAILURE_KIND, self.now_s()))
                elif st.status in (GoalStatus.STATUS_SUCCEEDED, GoalStatus.STATUS_CANCELED):
                    if self._nav_handled.get(gid) == "aborted":
                        self.close_need(rid, "resolved")
                    self._nav_handled[gid] = "done"
            while len(self._nav_handled) > 1000:
                self._nav_handled.pop(next(iter(self._nav_handled)))
        except (CoreInputError, ValueError) as exc:
            self._reject("navigation_status", str(exc))

    # ---------------------------------------------------------------- the decision
    def _decide(self, state: OpenNeed) -> None:
        if not self._active or state.served:
            return
        if state.need.request_id in self.pending:
            return   # one ask at a time per need; the outcome or expiry decides again
        now = self.now_s()
        self._follow_clock_jump(now)
        if now <= 0.0:   # sim time before /clock: never decide on time zero
            state.waiting_for_clock = True
            return
        if state.need.opened_at_s <= 0.0:
            state.need = replace(state.need, opened_at_s=now)
        state.waiting_for_clock = False
        model, config = self.params.model, self.params.config
        horizon = config.max_observation_age_s + IN_VIEW_EXTRA_S
        cands = []
        store_failed = False
        for pid, s in self.seen.items():
            if now - s.observed_at_s > horizon:
                continue
            try:
                rec = self.record_for(s.key)
                opted_out = self.store.is_opted_out(s.key)
            except Exception as exc:   # a store that cannot be read: nobody is asked
                self._store_failed("read", exc)
                store_failed, rec, opted_out = True, PersonRecord.new(model), True
            cands.append(candidate_from_record(
                pid, rec, now, model, s.person.distance_m, s.observed_at_s,
                busyness=s.person.busyness, activity=s.person.activity,
                opted_out=opted_out))
        settings = self.params.settings
        why = ("asking_disabled" if not settings.asking_enabled
               else STORE_UNAVAILABLE if store_failed or self.asking_paused_for_store
               else "need_ask_limit" if state.asks >= settings.max_asks_per_need else None)
        if why is not None:
            decision = decide(state.need, cands, now, self.robot_ask_times_s, model, config,
                              chooser=_never, policy=why)
        else:
            decision = decide(state.need, cands, now, self.robot_ask_times_s, model, config)
        # the newest max_asks_per_hour asks are always kept: a clock excursion far ahead must
        # not empty the memory that the hourly cap counts on when the clock comes back
        robot_asks = list(keep_recent_asks(self.robot_ask_times_s, now, HOUR_S,
                                           config.max_asks_per_hour))
        # parameters are spliced into the text from a cache (fast_text), not built per decision
        doc = wire.decision_to_document(decision, robot_asks, None, None,
                                        getattr(self.store, "robot_id", ""), check=False)
        # publish first: the bookkeeping below is not needed by whoever waits for the decision
        # (an outcome cannot be handled before this callback returns)
        self.decision_pub.publish(String(data=wire.fast_text(doc, model, config)))
        self.decisions_published += 1
        for c in cands:
            self.records[self.seen[c.person_id].key] = note_candidate(
                self.records[self.seen[c.person_id].key], now)
            self.last_action[c.person_id] = "passed over"
        if decision.action == "ask":
            i = decision.person_index
            ev = decision.evaluation
            pid = decision.person_id
            key = self.seen[pid].key
            self.records[key] = note_ask(self.records[key], now, model)
            self.robot_ask_times_s = robot_asks + [now]
            state.asks += 1
            self.pending[state.need.request_id] = PendingAsk(
                state.need.request_id, pid, key, now, float(ev.busyness[i]), float(ev.ask_load[i]),
                state.need.kind, now + self.params.settings.pending_ask_timeout_s)
            self.last_action[pid] = "asked"
        self.last_decision = doc

    # ---------------------------------------------------------------- timers
    def _housekeeping(self) -> None:
        if self.unsaved:
            self._retry_unsaved()
        now = self.now_s()
        self._follow_clock_jump(now)
        if now <= 0.0:
            return
        for rid, ask in list(self.pending.items()):
            if now >= ask.expires_at_s:
                del self.pending[rid]
                self.expired_asks += 1
                self.get_logger().info(f"ask for {rid!r} expired without outcome: no belief change")
                need = self.needs.get(rid)
                if need is not None:
                    self._decide(need)
        for need in list(self.needs.values()):
            if need.waiting_for_clock:
                self._decide(need)
        limit = self.params.config.max_observation_age_s + IN_VIEW_EXTRA_S
        for pid in [p for p, s in self.seen.items() if now - s.observed_at_s > limit]:
            del self.seen[pid]
        if (len(self.records) > self.max_records
                or len(self._last_seen_s) > 2 * self.max_records):
            self._evict_records(now)

    def _evict_records(self, now: float) -> None:
        """Keep memory bounded on a busy site: drop the records of the people seen longest
        ago, down to 90 % of the limit. Their beliefs stay in the store and come back when
        they are seen again; only their encounter count and first-seen time are lost. People
        in view, with a pending ask or asked within the ask memory are never dropped, so no
        limit (re-ask interval, daily cap) and no ask load is forgotten."""
        model = self.params.model
        horizon = max(86_400.0, 10.0 * model.ask_memory_half_life_s)
        keep = {s.key for s in self.seen.values()} | {a.key for a in self.pending.values()}
        droppable = [k for k, r in self.records.items() if k not in keep
                     and not any(now - t < horizon for t in r.ask_times_s)]
        droppable.sort(key=lambda k: self._last_seen_s.get(k, float("-inf")))
        for key in droppable[:max(len(self.records) - int(0.9 * self.max_records), 0)]:
            del self.records[key]
            self._last_seen_s.pop(key, None)
            self.records_evicted += 1
        for key in [k for k in self._last_seen_s if k not in self.records and k not in keep]:
            del self._last_seen_s[key]     # seen, never a candidate: nothing to keep

    def _publish_status(self) -> None:
        if not self._active:
            return
        stamp = self.get_clock().now().to_msg()
        self._publish_markers(stamp)
        period = self.params.settings.diagnostics_period_s
        rates = self.counters.rates_since_tick(period)
        new_rej = self.counters.new_rejections_since_tick() + self._new_side_refusals()
        level, message = diag.level_for(new_rej, self.counters.qos_incompatible, self.store_ok)
        if self.unsaved:
            message = (f"store refuses writes: asking paused, {len(self.unsaved)} outcome(s) "
                       f"held in memory ({self.store_error})")[:250]
        values = {}
        for k in diag.INPUTS:
            values[f"{k}.rate_hz"] = f"{rates[k]:.2f}"
            values[f"{k}.received"] = self.counters.received[k]
            values[f"{k}.rejected"] = self.counters.rejected[k]
            values[f"{k}.last_rejection"] = self.counters.last_reason[k]
        for name, part in self._side_inputs():
            values[f"{name}.rejected"] = part.refused_count
            values[f"{name}.last_rejection"] = part.last_refusal
            values.update(part.diagnostic_values())   # [signed-fleet] refusals by reason, keys
        store_name = type(self.store).__name__ if self.store is not None else "closed"
        values.update({
            "open_needs": len(self.needs), "pending_asks": len(self.pending),
            "expired_asks": self.expired_asks, "could_not_ask": self.could_not_ask,
            "decisions": self.decisions_published, "people_in_view": len(self.seen),
            "people_known": len(self.records), "people_evicted": self.records_evicted,
            "clock_jumps_forward": self.clock_jumps_forward,
            "store": store_name,
            "store_ok": self.store_ok, "store_last_error": self.store_error,
            "store_unsaved_outcomes": len(self.unsaved),
            "store_unsaved_dropped": self.unsaved_dropped,
            "asking_paused_for_store": self.asking_paused_for_store,
            "qos_incompatible_events": self.counters.qos_incompatible,
            "parameters_rejected": self.params.rejected,
            "parameters_last_rejection": self.params.last_rejection,
            "params_hash": self.params_hash(),
        })
        if self.store is not None and hasattr(self.store, "counts"):
            try:
                values.update({f"store.{k}": v for k, v in self.store.counts().items()})
            except Exception as exc:  # report, never stop the node over a status query
                values["store.counts_error"] = str(exc)[:200]
        elif self.store is not None:
            values["store.persons"] = len(self.store.keys())
        level, message = self.input_watch.report(   # input watchdog (issue 19)
            self.steady_s(), diag.silence_limits_s(self.params.settings), values, level, message)
        self.diag_pub.publish(diag.status_array(f"{self.get_name()}: decision",
                                                self.get_fully_qualified_name(), stamp, values,
                                                level, message))

    def _side_inputs(self) -> list:
        """The fleet and privacy topics: refusals counted by their own handlers."""
        return [(name, part) for name, part in (("fleet_outcomes", getattr(self, "fleet", None)),
                                                ("privacy_request", getattr(self, "privacy", None)))
                if part is not None]

    def _new_side_refusals(self) -> int:
        total = sum(part.refused_count for _, part in self._side_inputs())
        new, self._side_refusals_seen = total - getattr(self, "_side_refusals_seen", 0), total
        return max(new, 0)

    def _publish_markers(self, stamp) -> None:
        markers = []
        model = self.params.model
        now = self.now_s()
        lifetime = max(2.0 * self.params.settings.diagnostics_period_s, 1.0)
        in_view = set()
        for pid, s in self.seen.items():
            in_view.add(pid)
            rec = self.records.get(s.key) or PersonRecord.new(model)
            from ..core import belief_at
            mean = belief_at(rec, now, model).mean
            pos = s.person.position or (s.person.distance_m, 0.0, 0.0)
            pos = (pos[0], pos[1], pos[2] + 2.0)   # above the head
            text = f"w={mean:.2f} {self.last_action.get(pid, '')}".strip()
            markers.append(mk.person_marker(self._marker_ids.get(pid), s.frame_id, stamp, pos,
                                            text, lifetime))
        for pid in self._marked - in_view:
            mid = self._marker_ids.drop(pid)
            self.last_action.pop(pid, None)
            if mid is not None:
                markers.append(mk.delete_marker(mid, "base_link", stamp))
        self._marked = in_view
        if markers:
            self.marker_pub.publish(mk.marker_array(markers))


def resolve_store_path(store_path: str) -> str:
    """'' -> <ROS_HOME or ~/.ros>/helpaware/beliefs.sqlite3; 'memory' -> '' (in this process)."""
    if store_path == MEMORY_STORE:
        return ""
    return store_path or str(default_store_path())


def main(args=None) -> int:
    shm = StartupSweep()   # shared memory of killed instances (issue 19): claimed before rclpy
    try:
        rclpy.init(args=args)
    except RCLError as exc:   # e.g. a parameter file rcl cannot parse: say so, no traceback
        print(f"{NODE_NAME}: cannot start: {str(exc).strip()}", file=sys.stderr)
        return 2
    node = None
    code = 0
    try:
        # the executor exists before the node announces itself, so a signal that follows the
        # announcement never lands inside the executor's construction
        executor = SingleThreadedExecutor()
        node = HelpAwareNode()
        shm.participant_up(node.get_logger())    # removed, and this process recorded (issue 19)
        executor.add_node(node)
        executor.spin()
    except (KeyboardInterrupt, ExternalShutdownException):
        pass
    except StartupError as exc:
        print(f"{NODE_NAME}: {exc}", file=sys.stderr)
        code = 2
    except Exception:
        if rclpy.ok():
            raise
        # a signal shut the context down while the node was still starting: a clean exit
    finally:
        if node is not None:
            try:
                node.destroy_node()
            except Exception:  # the context may already be gone after a signal
                pass
        rclpy.try_shutdown()
        shm.finish()           # what this process leaves, once its participant is gone (issue 19)
    return code


if __name__ == "__main__":
    sys.exit(main())
