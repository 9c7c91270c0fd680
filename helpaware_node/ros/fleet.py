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

"""Fleet exchange: robots share signed events on one site-wide topic and merge them by id.

The topic is `/helpaware/fleet` by default (the node's `fleet_topic` parameter): an absolute
name, so robots in their own namespaces share it without remapping.  Each message is one
std_msgs/String holding a signed document (helpaware_node/fleet_documents.py; format in
docs/store.md, signatures and keys in docs/security.md): outcome events, asks, forgets,
opt-outs.
A document that is unsigned, of the old unsigned format, signed for another site, signed with
a key this robot does not hold, or whose signature does not match is dropped and counted by
reason (`refusals`, shown in /diagnostics); the first of each reason is logged at once, later
ones at most once a minute with their number.  None of them is stored or merged.

The topic is reliable and transient local with a deep history, and a robot re-offers its most
recent stored events and asks and its opt-out list at start, so a robot that starts late
catches up. The merge is store.append (asks: store.append_asks): idempotent by event id, and
the fold orders events by (time, event id), so any arrival order and any duplication (a
replay) yield the same beliefs and ask histories everywhere.
A forget or opt-out belongs to a request (its `request_id`); each robot applies one request
once and answers it once with its own signed act, so the request reaches every robot, also
those that were not listening when it was sent (they get it from a peer's history).

Catch-up of a late joiner: the topic has no key, so a reader's KEEP_LAST depth is shared by
ALL writers, and several peers' histories together (2 x 3 000) overflow a 5 000-deep reader
while it is still taking them (DDS delivers them faster than Python takes them; a slow store
makes it worse).  So the reader keeps all (KEEP_ALL: a reliable reader that is full makes the
writers resend instead of losing), the callback only decodes and queues, and a short timer
stores the queue in batches (one transaction, sorted by time) before anything learns from it.
"""
from __future__ import annotations

import argparse
from collections import deque, OrderedDict
import sys
import threading
import time
from typing import Callable, Iterable, Optional

from rclpy.clock import Clock, ClockType
from rclpy.qos import DurabilityPolicy, HistoryPolicy, QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

# the privacy topic lives in ros/privacy.py; ros/node.py and ros/node_entities.py import both
# from here
from .privacy import PRIVACY_TOPIC, PrivacyRequests  # noqa: F401
from .refusal_log import CountsRefusals, exception_text, HANDLER_ERROR, LogThrottle, Refusals
from ..core import CoreInputError, Result, SiteModel
from ..core.preview import quoted
from ..fleet_documents import (
    decode_document,
    encode_document,
    MALFORMED,
    OLD_FORMAT,
    PRIVACY_KINDS,
    PrivacyAct,
)
from ..signing import (
    BAD_SIGNATURE,
    EXPIRED_KEY,
    KeyRing,
    OTHER_SITE,
    UNKNOWN_KEY,
    UNSIGNED,
    utc_text,
)
from ..store.base import AnyEvent, append_batch, AskEvent, StoredEvent
from ..store.ids import refused_by_store

FLEET_TOPIC = "/helpaware/fleet"    # site-wide: every robot of the site, whatever its namespace
FLEET_HISTORY_DEPTH = 5000      # messages kept per publisher for late joiners
MERGE_PERIOD_S = 0.05           # how often the queue of received fleet events is looked at
MERGE_BATCH = 500               # events stored per tick at most (one transaction)
MERGE_TICK_BUDGET_S = 0.1       # one-by-one appends (the node's ingest): work per tick at most
# a smaller batch waits this long for more (catch-up: 6 000 events out of order take 24 s one
# by one, 2 s in 500s)
MERGE_WAIT_S = 0.2
MAX_QUEUED = 200_000            # events received but not yet stored (~40 peers' histories)
MAX_REMEMBERED_REQUESTS = 100_000   # privacy requests applied this session (each applied once)
REFUSAL_REASONS = (UNSIGNED, OLD_FORMAT, OTHER_SITE, UNKNOWN_KEY, EXPIRED_KEY, BAD_SIGNATURE,
                   MALFORMED, HANDLER_ERROR)
DIAGNOSTICS_PREFIX = "fleet_outcomes"     # the /diagnostics keys of this link (unchanged name)

Merged = Callable[[list[AnyEvent]], None]


def fleet_qos(depth: int = FLEET_HISTORY_DEPTH) -> QoSProfile:
    return QoSProfile(history=HistoryPolicy.KEEP_LAST, depth=depth,
                      reliability=ReliabilityPolicy.RELIABLE,
                      durability=DurabilityPolicy.TRANSIENT_LOCAL)


def fleet_reader_qos(depth: int = FLEET_HISTORY_DEPTH) -> QoSProfile:
    """Return the subscription's QoS.

    Keeps all, since one reader holds every peer's history at once (`depth` only matters to readers
    that fall back to keep-last).
    """
    return QoSProfile(history=HistoryPolicy.KEEP_ALL, depth=depth,
                      reliability=ReliabilityPolicy.RELIABLE,
                      durability=DurabilityPolicy.TRANSIENT_LOCAL)


def key_ring_of(store) -> KeyRing:
    """Return the signing keys of the store's site key file (signing.py, store/keys.py)."""
    return store.site_keys.key_ring()


def merge(store, text: str, keys: KeyRing, forgotten: set[str] | None = None,
          append: Optional[Callable[[StoredEvent], bool]] = None,
          on_forgotten: Optional[Callable[[str], None]] = None,
          now_s: Optional[float] = None) -> list[StoredEvent]:
    """Apply one fleet message to the store; returns the events that were new here.

    `append` defaults to store.append (the node passes its own ingest, which appends and
    then updates what it holds in memory).  Raises CoreInputError for a refused document.
    """
    kind, value = decode_document(text, keys, now_s)
    if kind == "forget":
        if forgotten is not None:
            forgotten.add(value.person_key)
        store.forget(value.person_key)
        if on_forgotten is not None:
            on_forgotten(value.person_key)
        return []
    if kind == "opt_out":
        store.opt_out(value.person_key)
        return []
    if forgotten is not None and value.person_key in forgotten:
        return []        # forgotten this session: an older copy replayed by a peer
    if kind == "ask":
        return list(store.append_asks([value]))
    return [value] if (append or store.append)(value) else []


class FleetLink(CountsRefusals):
    """Publishes this robot's outcomes, asks and privacy acts, and merges everyone else's.

    Received events are decoded (and refused) at once, queued, and stored by a timer in
    batches of up to MERGE_BATCH (a smaller batch after MERGE_WAIT_S), sorted by (time,
    event id): with the store's `append_many` in one transaction, else one `append` (or the
    owner's `append`) per event; an owner that learns per batch passes `append_many` (store
    the batch, then learn; returns the events stored).  Only after an event is stored does
    anything learn from it (`on_merged`, or the owner's callback itself).  A forget or an
    opt-out is applied at once, and a queued event of a forgotten key is dropped when its
    batch is stored.  Asks travel and queue like outcomes; without an owner's `append_many`
    they go to the store's `append_asks`.  Documents are signed with `keys` (default: the
    store's site key file) and only documents signed with a key of that ring are taken.
    With `jobs` (store/jobs.py) a forget or opt-out is in force in memory at once and its
    rows are written on the worker; the answer to a request is published once they are.
    """

    def __init__(self, node, store, on_merged: Optional[Merged] = None,
                 topic: str = FLEET_TOPIC, depth: int = FLEET_HISTORY_DEPTH,
                 replay: bool = True, append: Optional[Callable[[StoredEvent], bool]] = None,
                 on_forgotten: Optional[Callable[[str], None]] = None,
                 append_many: Optional[Callable[[list[AnyEvent]],
                                                list[AnyEvent]]] = None,
                 keys: Optional[KeyRing] = None,
                 clock: Callable[[], float] = time.time, jobs=None) -> None:
        self._node = node
        self._store = store
        self._jobs = jobs
        self._on_merged = on_merged
        self._append = append
        self._append_many = append_many
        self._on_forgotten = on_forgotten
        self._keys = keys if keys is not None else key_ring_of(store)
        self._clock = clock                 # wall clock: the previous key's window, requests
        self.topic = topic
        self.sender = getattr(store, "robot_id", "") or "robot"
        self._forgotten: set[str] = set()
        self._applied: OrderedDict[str, None] = OrderedDict()   # privacy requests done here
        self._lock = threading.RLock()
        self._queued: deque[AnyEvent] = deque()
        self._queued_since_s = 0.0      # monotonic time the oldest queued event arrived
        self.merged_count = 0
        self.dropped_count = 0          # queue full (MAX_QUEUED): counted and logged
        self.store_failures = 0         # a batch the store refused: kept and tried again
        self.dropped_bad_events = 0     # taken, but the store could not hold them: dropped
        self.not_reoffered = 0          # stored before today's rules, which refuse them
        self.tick_errors = 0            # a merge tick that raised (contained, logged)
        self.acts_applied = 0           # forgets and opt-outs applied (each request once)
        self._refused = Refusals(node.get_logger().warning, topic)   # by reason, logged once
        self._log = LogThrottle()       # per-event lines of this link, by kind
        self._pub = node.create_publisher(String, topic, fleet_qos(depth))
        self._sub = node.create_subscription(String, topic, self._on_delivery,
                                             fleet_reader_qos(depth))
        # on the steady clock: a held /clock (use_sim_time) must not stop peers' events
        self._timer = node.create_timer(MERGE_PERIOD_S, self._on_tick,
                                        clock=Clock(clock_type=ClockType.STEADY_TIME))
        k = self._keys
        node.get_logger().info(
            f"{topic}: signing as site {k.site_id} with key {k.current.key_id}" + (
                f"; previous key {k.previous.key_id} accepted until "
                f"{utc_text(k.previous_until_s)}" if k.previous is not None else ""))
        if replay:                      # re-offer after a restart
            if hasattr(store, "recent_events"):
                self.publish_many(store.recent_events(depth))
            if hasattr(store, "recent_asks"):
                self.publish_many(store.recent_asks(depth))
            if hasattr(store, "opted_out"):
                for key in store.opted_out():
                    self.publish_act(PrivacyAct.new("opt_out", key, self.sender, request_id=""))

    @property
    def entities(self) -> list:
        """Return the publisher, subscription and merge timer, for the owner's teardown."""
        return [self._pub, self._sub, self._timer]

    @property
    def keys(self) -> KeyRing:
        return self._keys

    @property
    def queued_count(self) -> int:
        """Events received but not yet stored."""
        return len(self._queued)

    def publish(self, event: AnyEvent) -> None:
        """Share one outcome or ask (call once the store has it)."""
        kind = "ask" if isinstance(event, AskEvent) else "outcome"
        self._pub.publish(String(data=encode_document(kind, event, self._keys)))

    def publish_many(self, events: Iterable[AnyEvent]) -> None:
        """Share stored events (the re-offer at start).

        One the rules refuse now (stored by an older version: a long request kind, an odd event id)
        is skipped and counted, so an old store never stops a start.
        """
        for e in events:
            try:
                self.publish(e)
            except CoreInputError as exc:
                self.not_reoffered += 1
                text = self._log.due("not_reoffered", f"{self.topic}: stored event "
                                     f"{quoted(e.event_id)} not re-offered: {exc} (it stays "
                                     "in the store; more are counted in /diagnostics)")
                if text is not None:
                    self._node.get_logger().warning(text)

    def publish_act(self, act: PrivacyAct) -> None:
        self._pub.publish(String(data=encode_document(act.action, act, self._keys)))

    def forget(self, person_key: str, request_id: Optional[str] = None) -> int:
        """Forget here and ask every robot to forget too.

        Forget here and ask every robot to forget too (a request of its own unless `request_id`
        names the one this answers); returns the events removed here.
        """
        act = PrivacyAct.new("forget", person_key, self.sender, request_id)
        self._remember(act.identity)
        if self._jobs is not None:      # removed here once the worker has done it: 0 now
            self._forget_here(person_key, self._answer_when_done(act, act))
            return 0
        n = self._forget_here(person_key)
        self.publish_act(act)
        return n

    def opt_out(self, person_key: str, request_id: Optional[str] = None) -> None:
        """Opt out here and on every robot of the site."""
        act = PrivacyAct.new("opt_out", person_key, self.sender, request_id)
        self._remember(act.identity)
        if self._jobs is not None:
            self._jobs.opt_out(person_key, self._answer_when_done(act, act))
            return
        self._store.opt_out(person_key)
        self.publish_act(act)

    def _answer_when_done(self, act: PrivacyAct, answer: Optional[PrivacyAct]):
        """Return the worker's report (on the executor).

        Publish `answer` once the rows are written; a store that refused forgets the request, so a
        copy offered again is applied then (as a synchronous refusal would).
        """
        def done(job) -> None:
            if job.error is None:
                if answer is not None:
                    self.publish_act(answer)
                return
            with self._lock:
                self._applied.pop(act.identity, None)
            self.store_failures += 1
            text = self._log.due("privacy_store_error", f"{self.topic}: the store refused "
                                 f"{act.action} of {act.person_key[:12]}... "
                                 f"({exception_text(job.error)}); applied again when offered")
            if text is not None:
                self._node.get_logger().error(text)
        return done

    def apply_act(self, act: PrivacyAct) -> bool:
        """Apply a forget or opt-out received from the console or a peer.

        Applied once per request, and a request is answered once with this robot's own signed act
        (which also carries it to robots that were not listening).  False when it was applied here
        already.
        """
        with self._lock:
            if act.identity in self._applied:
                return False
        if self._jobs is not None:     # in memory now, rows on the worker, answer after
            answer = (PrivacyAct.new(act.action, act.person_key, self.sender,
                                     request_id=act.request_id) if act.request_id else None)
            self._remember(act.identity)
            done = self._answer_when_done(act, answer)
            if act.action == "forget":
                self._forget_here(act.person_key, done)
            else:
                self._jobs.opt_out(act.person_key, done)
            return True
        if act.action == "forget":     # a store that refuses raises: not remembered, so a
            self._forget_here(act.person_key)   # copy offered again is applied then
        else:
            self._store.opt_out(act.person_key)
        self._remember(act.identity)
        if act.request_id:          # a re-offered opt-out (no request) is not answered
            self.publish_act(PrivacyAct.new(act.action, act.person_key, self.sender,
                                            request_id=act.request_id))
        return True

    def _remember(self, identity: str) -> bool:
        with self._lock:
            if identity in self._applied:
                return False
            self._applied[identity] = None
            while len(self._applied) > MAX_REMEMBERED_REQUESTS:
                self._applied.popitem(last=False)
            self.acts_applied += 1
            return True

    def _forget_here(self, key: str, done=None) -> int:
        with self._lock:
            self._forgotten.add(key)
            if self._jobs is not None:
                self._jobs.forget(key, done)
                n = 0
            else:
                n = self._store.forget(key)
        if self._on_forgotten is not None:
            self._on_forgotten(key)
        return n

    def diagnostic_values(self) -> dict[str, object]:
        """Return what /diagnostics shows of the link: queue, refusals by reason, keys in force."""
        p, k = DIAGNOSTICS_PREFIX, self._keys
        values: dict[str, object] = {f"{p}.queued": self.queued_count,
                                     f"{p}.dropped": self.dropped_count,
                                     f"{p}.store_failures": self.store_failures,
                                     f"{p}.dropped_bad_events": self.dropped_bad_events,
                                     f"{p}.not_reoffered": self.not_reoffered,
                                     f"{p}.merge_errors": self.tick_errors,
                                     f"{p}.privacy_acts_applied": self.acts_applied}
        values.update({f"{p}.refused.{r}": self.refusals[r] for r in REFUSAL_REASONS})
        values.update({"fleet.topic": self.topic, "fleet.site_id": k.site_id,
                       "fleet.key_id": k.current.key_id,
                       "fleet.previous_key_id": k.previous.key_id if k.previous else "",
                       "fleet.previous_key_accepted_until": (
                           utc_text(k.previous_until_s) if k.previous else "")})
        return values

    # -- receiving
    def _on_delivery(self, msg: String) -> None:
        """Take a delivery (the subscription callback): decode, queue, return; the timer stores.

        Whatever one document does, it is contained here: a refusal is counted by reason, anything
        else under handler_error; the robot carries on either way.
        """
        try:
            item = self._decode_counted(msg.data)
            if item is not None:
                self._take(*item)
        except Exception as exc:  # noqa: BLE001 - no peer document may stop the robot
            if self._refused.failed(exc, self._log, self._node.get_logger().error):
                self.store_failures += 1        # a forget or opt-out the store refused

    def _take(self, kind: str, value) -> None:
        if kind in PRIVACY_KINDS:
            self.apply_act(value)
        elif kind not in ("outcome", "ask"):
            return              # a kind this link does not merge
        elif len(self._queued) >= MAX_QUEUED:
            self.dropped_count += 1
            self._node.get_logger().error(
                f"{self.topic}: {MAX_QUEUED} events waiting to be stored; dropped "
                f"{value.event_id} (is the store very slow?)", throttle_duration_sec=10.0)
        else:
            if not self._queued:
                self._queued_since_s = time.monotonic()
            self._queued.append(value)

    def _on_message(self, msg: String) -> None:
        """Apply one message now, after everything queued (as one delivery, stored at once)."""
        self._on_delivery(msg)
        try:
            self.flush()
        except Exception as exc:  # noqa: BLE001 - contained like the timer's batches
            self._merge_failed(exc)

    def flush(self) -> int:
        """Store everything queued now; returns the events that were new here."""
        n = 0
        while self._queued:
            stored = self._store_queued()
            if stored is None:
                break          # the store refused: the rest waits for the timer
            n += stored
        return n

    def _decode_counted(self, text: str):
        try:
            return decode_document(text, self._keys, self._clock())
        except CoreInputError as exc:
            self._refused.add(exc)
            return None

    def _on_tick(self) -> None:
        """Store a full batch at once (the timer).

        a smaller one once it waited MERGE_WAIT_S.
        """
        try:
            if self._queued and (len(self._queued) >= MERGE_BATCH
                                 or time.monotonic() - self._queued_since_s >= MERGE_WAIT_S):
                self._store_queued()
        except Exception as exc:  # noqa: BLE001 - learning from a batch failed: say so, go on
            self._merge_failed(exc)

    def _merge_failed(self, exc: BaseException) -> None:
        self.tick_errors += 1
        text = self._log.due("tick_error", f"{self.topic}: storing or learning from fleet "
                             f"events failed ({exception_text(exc)}); the next batch is tried")
        if text is not None:
            self._node.get_logger().error(text)

    def _store_queued(self) -> Optional[int]:
        """One batch from the queue into the store, then learn from it (the timer callback).

        Returns how many were new, or None when the store refused (the rest stays queued).
        """
        if not self._queued:
            return 0
        with self._lock:
            batch = [self._queued.popleft() for _ in range(min(MERGE_BATCH, len(self._queued)))]
            fresh = [e for e in batch if e.person_key not in self._forgotten]
            fresh.sort(key=lambda e: (float(e.time_s), e.event_id))
            new, rest, error = self._store_batch(fresh)
            if rest:                         # back at the front, still in order
                self._queued.extendleft(reversed(rest))
            if self._queued:
                self._queued_since_s = time.monotonic()     # the rest: next batch
        if error is not None:                # disk full, read-only...: kept, tried again
            self.store_failures += 1
            self._node.get_logger().error(
                f"{self.topic}: the store refused fleet events ({error}); {len(rest)} kept "
                "and tried again", throttle_duration_sec=10.0)
        if new:
            self.merged_count += len(new)
            if self._on_merged is not None:
                self._on_merged(new)
        return None if error is not None else len(new)

    def _store_batch(self, events: list[AnyEvent]):
        """Return (stored, not yet tried, error): a batch call is all or nothing.

        One call per event stops after MERGE_TICK_BUDGET_S, so the owner's other callbacks are not
        held long.

        A write that fails because of the store (refused_by_store: disk full, read-only, I/O)
        keeps the events for the next try.  One that fails because of its events (a value
        the store cannot hold, which the decoder should have refused) must not hold the
        queue forever: the culprits are found by halving and dropped, counted and logged,
        and the rest of the batch is stored.
        """
        whole = self._append_many or (None if self._append is not None
                                      else lambda batch: append_batch(self._store, batch))
        if whole is not None:
            return self._isolated(whole, events)
        stored: list[AnyEvent] = []
        append = self._append
        assert append is not None   # else `whole` took the batch
        deadline_s = time.monotonic() + MERGE_TICK_BUDGET_S
        for i, e in enumerate(events):
            if i and time.monotonic() > deadline_s:
                return stored, events[i:], None
            try:
                new = (bool(self._store.append_asks([e])) if isinstance(e, AskEvent)
                       else append(e))
                if new:
                    stored.append(e)
            except Exception as exc:
                if refused_by_store(exc):
                    return stored, events[i:], exc
                self._drop_bad(e, exc)
        return stored, [], None

    def _isolated(self, whole, events: list[AnyEvent]):
        """`whole(events)`; if it raises for its events, each half on its own.

        Down to the single events that fail alone (about 2 log2(n) writes for one culprit in n).
        """
        stored: list[AnyEvent] = []
        parts = [events]
        while parts:
            part = parts.pop(0)
            try:
                stored += list(whole(part))
            except Exception as exc:
                if refused_by_store(exc):
                    return stored, [e for p in [part] + parts for e in p], exc
                if len(part) == 1:
                    self._drop_bad(part[0], exc)
                else:
                    parts[:0] = [part[:len(part) // 2], part[len(part) // 2:]]
        return stored, [], None

    def _drop_bad(self, event: AnyEvent, exc: BaseException) -> None:
        self.dropped_bad_events += 1
        text = self._log.due("dropped_bad_event", f"{self.topic}: fleet event "
                             f"{quoted(getattr(event, 'event_id', ''))} dropped: the store "
                             f"cannot hold it ({exception_text(exc)}); the rest of its batch "
                             "is stored")
        if text is not None:
            self._node.get_logger().error(text)


# -- a small stand-alone peer (tests, trying the exchange by hand) ------------------------
def run_peer(argv: list[str] | None = None) -> int:
    """Line protocol on stdin: 'outcome RAW_ID RESULT TIME_S', 'belief RAW_ID', 'counts', 'quit'.

    Prints 'ready', 'ack EVENT_ID', 'merged EVENT_ID', 'belief A B' (repr floats),
    'counts merged=N refused=N <reason>=N ...'.
    """
    import rclpy
    from rclpy.executors import SingleThreadedExecutor

    from ..store import open_store

    p = argparse.ArgumentParser(prog="fleet-peer")
    p.add_argument("--store", required=True)
    p.add_argument("--key-file", required=True)
    p.add_argument("--robot-id", required=True)
    p.add_argument("--depth", type=int, default=FLEET_HISTORY_DEPTH,
                   help="history kept per publisher and re-offered at start (messages)")
    p.add_argument("--topic", default=FLEET_TOPIC, help=f"fleet topic (default {FLEET_TOPIC})")
    args = p.parse_args(argv)
    if args.depth < 1:
        p.error(f"--depth: {args.depth} must be >= 1")
    store = open_store(args.store, args.robot_id, key_path=args.key_file)
    out_lock = threading.Lock()

    def say(line: str) -> None:
        with out_lock:
            sys.stdout.write(line + "\n")
            sys.stdout.flush()

    rclpy.init()
    node = rclpy.create_node(f"fleet_peer_{args.robot_id}")

    def merged(evs: list[AnyEvent]) -> None:
        for e in evs:
            say(f"merged {e.event_id}")

    link = FleetLink(node, store, merged,
                     depth=args.depth, topic=args.topic)
    executor = SingleThreadedExecutor()
    executor.add_node(node)
    spin = threading.Thread(target=executor.spin, daemon=True)
    spin.start()
    say("ready")
    try:
        for line in sys.stdin:
            parts = line.split()
            if not parts:
                continue
            if parts[0] == "quit":
                break
            if parts[0] == "outcome":
                e = StoredEvent(store.next_event_id(), store.key_for(parts[1]), float(parts[3]),
                                Result.parse(parts[2]), 0.2, 0.0, "door")
                if store.append(e):
                    link.publish(e)
                say(f"ack {e.event_id}")
            elif parts[0] == "belief":
                b, _ = store.belief(store.key_for(parts[1]), SiteModel())   # open_store's model
                say(f"belief {b.a!r} {b.b!r}")
            elif parts[0] == "counts":
                say(f"counts merged={link.merged_count} refused={link.refused_count} "
                    + " ".join(f"{r}={link.refusals[r]}" for r in REFUSAL_REASONS))
    finally:
        executor.shutdown(timeout_sec=1.0)
        node.destroy_node()
        rclpy.try_shutdown()
        store.close()
    return 0


if __name__ == "__main__":
    sys.exit(run_peer())
