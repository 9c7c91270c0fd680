"""Fleet exchange: robots share outcomes and asks on `fleet/outcomes` and merge them by event id.

The documents (outcome, ask, forget) are defined in fleet_messages.py. The topic is reliable
and transient local with a deep history, and a robot re-offers its most recent stored events
and asks at start, so a robot that starts late catches up.  The merge is store.append (asks:
store.append_asks): idempotent by event id, and the fold orders events by (time, event id), so
any arrival order and any duplication yield the same beliefs and ask histories on every robot.

Catch-up of a late joiner: the topic has no key, so a reader's KEEP_LAST depth is shared by
ALL writers, and several peers' histories together (2 x 3 000) overflow a 5 000-deep reader
while it is still taking them (DDS delivers them faster than Python takes them; a slow store
makes it worse).  So the reader keeps all (KEEP_ALL: a reliable reader that is full makes the
writers resend instead of losing), the callback only decodes and queues, and a short timer
stores the queue in batches (one transaction, sorted by time) before anything learns from it.
"""
from __future__ import annotations

import argparse
import sys
import threading
import time
from collections import deque
from typing import Callable, Iterable, Optional

from rclpy.qos import DurabilityPolicy, HistoryPolicy, QoSProfile, ReliabilityPolicy
from std_msgs.msg import String

from ..core import CoreInputError, Result
from ..store.base import AnyEvent, AskEvent, StoredEvent, append_batch
from ..store.sqlite import PERSON_KEY_RE
from .fleet_messages import (FORMAT_VERSION, decode, encode_any, encode_ask,  # noqa: F401
                             encode_event, encode_forget, encode_message, load_json,
                             refuse_surrogates)

FLEET_TOPIC = "fleet/outcomes"
FLEET_HISTORY_DEPTH = 5000      # messages kept per publisher for late joiners
MERGE_PERIOD_S = 0.05           # how often the queue of received fleet events is looked at
MERGE_BATCH = 500               # events stored per tick at most (one transaction)
MERGE_TICK_BUDGET_S = 0.1       # one-by-one appends (the node's ingest): work per tick at most
MERGE_WAIT_S = 0.2              # a smaller batch waits this long for more (catch-up: 6 000
                                # events out of order take 24 s one by one, 2 s in 500s)
MAX_QUEUED = 200_000            # bound on events received but not yet stored (~40 peers' histories)

Merged = Callable[[list[AnyEvent]], None]


def fleet_qos(depth: int = FLEET_HISTORY_DEPTH) -> QoSProfile:
    return QoSProfile(history=HistoryPolicy.KEEP_LAST, depth=depth,
                      reliability=ReliabilityPolicy.RELIABLE,
                      durability=DurabilityPolicy.TRANSIENT_LOCAL)


def fleet_reader_qos(depth: int = FLEET_HISTORY_DEPTH) -> QoSProfile:
    """The subscription's QoS: keeps all, since one reader holds every peer's history at
    once (`depth` only matters to readers that fall back to keep-last)."""
    return QoSProfile(history=HistoryPolicy.KEEP_ALL, depth=depth,
                      reliability=ReliabilityPolicy.RELIABLE,
                      durability=DurabilityPolicy.TRANSIENT_LOCAL)


def merge(store, text: str, forgotten: set[str] | None = None,
          append: Optional[Callable[[StoredEvent], bool]] = None,
          on_forgotten: Optional[Callable[[str], None]] = None) -> list[StoredEvent]:
    """Apply one fleet message to the store; returns the events (or asks) new here.

    `append` defaults to store.append (the node passes its own ingest, which appends and
    then updates what it holds in memory); asks go to store.append_asks.
    """
    kind, value = decode(text)
    if kind == "ask":
        if forgotten is not None and value.person_key in forgotten:
            return []
        return list(store.append_asks([value]))
    if kind == "forget":
        if forgotten is not None:
            forgotten.add(value)
        store.forget(value)
        if on_forgotten is not None:
            on_forgotten(value)
        return []
    if forgotten is not None and value.person_key in forgotten:
        return []        # forgotten this session: an older copy replayed by a peer
    return [value] if (append or store.append)(value) else []


class FleetLink:
    """Publishes this robot's outcomes and asks and merges everyone else's into the store.

    Received events are decoded (and refused) at once, queued, and stored by a timer in
    batches of up to MERGE_BATCH (a smaller batch after MERGE_WAIT_S), sorted by (time,
    event id): with the store's `append_many` in one transaction, else one `append` (or the
    owner's `append`) per event; an owner that learns per batch passes `append_many` (store
    the batch, then learn; returns the events stored).  Only after an event is stored does
    anything learn from it (`on_merged`, or the owner's callback itself).  A forget is
    applied at once, and a queued event of a forgotten key is dropped when its batch is
    stored.  Asks travel and queue like outcomes; without an owner's `append_many` they go
    to the store's `append_asks`.
    """

    def __init__(self, node, store, on_merged: Optional[Merged] = None,
                 topic: str = FLEET_TOPIC, depth: int = FLEET_HISTORY_DEPTH,
                 replay: bool = True, append: Optional[Callable[[StoredEvent], bool]] = None,
                 on_forgotten: Optional[Callable[[str], None]] = None,
                 append_many: Optional[Callable[[list[StoredEvent]],
                                                list[StoredEvent]]] = None) -> None:
        self._node = node
        self._store = store
        self._on_merged = on_merged
        self._append = append
        self._append_many = append_many
        self._on_forgotten = on_forgotten
        self._forgotten: set[str] = set()
        self._lock = threading.RLock()
        self._queued: deque[AnyEvent] = deque()
        self._queued_since_s = 0.0      # monotonic time the oldest queued event arrived
        self.merged_count = 0
        self.refused_count = 0
        self.last_refusal = ""
        self.dropped_count = 0          # queue full (MAX_QUEUED): counted and logged
        self.store_failures = 0         # a batch the store refused: kept and tried again
        self._pub = node.create_publisher(String, topic, fleet_qos(depth))
        self._sub = node.create_subscription(String, topic, self._on_delivery,
                                             fleet_reader_qos(depth))
        self._timer = node.create_timer(MERGE_PERIOD_S, self._on_tick)
        if replay and hasattr(store, "recent_events"):   # re-offer after a restart
            self.publish_many(store.recent_events(depth))
            if hasattr(store, "recent_asks"):
                self.publish_many(store.recent_asks(depth))

    @property
    def entities(self) -> list:
        """Publisher, subscription and merge timer, for the owner's teardown."""
        return [self._pub, self._sub, self._timer]

    @property
    def queued_count(self) -> int:
        """Events received but not yet stored."""
        return len(self._queued)

    def publish(self, event: AnyEvent) -> None:
        """Share one outcome or ask (call once the store has it)."""
        self._pub.publish(String(data=encode_any(event)))

    def publish_many(self, events: Iterable[AnyEvent]) -> None:
        for e in events:
            self.publish(e)

    def forget(self, person_key: str) -> int:
        """Forget here and ask every robot to forget too."""
        with self._lock:
            self._forgotten.add(person_key)
            n = self._store.forget(person_key)
        if self._on_forgotten is not None:
            self._on_forgotten(person_key)
        self._pub.publish(String(data=encode_forget(person_key, getattr(
            self._store, "robot_id", ""))))
        return n

    # -- receiving
    def _on_delivery(self, msg: String) -> None:
        """The subscription callback: decode, queue, return (storing is the timer's job)."""
        item = self._decode_counted(msg.data)
        if item is None:
            return
        kind, value = item
        if kind == "forget":
            self._apply_forget(value)
        elif len(self._queued) >= MAX_QUEUED:
            self.dropped_count += 1
            self._node.get_logger().error(
                f"{FLEET_TOPIC}: {MAX_QUEUED} events waiting to be stored; dropped "
                f"{value.event_id} (is the store very slow?)", throttle_duration_sec=10.0)
        else:
            if not self._queued:
                self._queued_since_s = time.monotonic()
            self._queued.append(value)

    def _on_message(self, msg: String) -> None:
        """Apply one message now, after everything queued (as one delivery, stored at once)."""
        self._on_delivery(msg)
        self.flush()

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
            return decode(text)
        except CoreInputError as exc:
            self.refused_count += 1
            self.last_refusal = str(exc)[:200]
            self._node.get_logger().warning(f"{FLEET_TOPIC}: refused a message: {exc}",
                                            throttle_duration_sec=10.0)
            return None

    def _apply_forget(self, key: str) -> None:
        with self._lock:
            self._forgotten.add(key)
            self._store.forget(key)
        if self._on_forgotten is not None:
            self._on_forgotten(key)

    def _on_tick(self) -> None:
        """The timer: store a full batch at once, a smaller one once it waited MERGE_WAIT_S."""
        if self._queued and (len(self._queued) >= MERGE_BATCH
                             or time.monotonic() - self._queued_since_s >= MERGE_WAIT_S):
            self._store_queued()

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
                f"{FLEET_TOPIC}: the store refused fleet events ({error}); {len(rest)} kept "
                "and tried again", throttle_duration_sec=10.0)
        if new:
            self.merged_count += len(new)
            if self._on_merged is not None:
                self._on_merged(new)
        return None if error is not None else len(new)

    def _store_batch(self, events: list[AnyEvent]):
        """(stored, not yet tried, error): a batch call is all or nothing; one call per event
        stops after MERGE_TICK_BUDGET_S, so the owner's other callbacks are not held long."""
        whole = self._append_many or (None if self._append is not None
                                      else lambda batch: append_batch(self._store, batch))
        if whole is not None:
            try:
                return list(whole(events)), [], None
            except Exception as exc:
                return [], events, exc
        stored: list[AnyEvent] = []
        deadline_s = time.monotonic() + MERGE_TICK_BUDGET_S
        for i, e in enumerate(events):
            if i and time.monotonic() > deadline_s:
                return stored, events[i:], None
            try:
                if isinstance(e, AskEvent):
                    new = bool(self._store.append_asks([e]))
                else:
                    new = self._append(e)
                if new:
                    stored.append(e)
            except Exception as exc:
                return stored, events[i:], exc
        return stored, [], None


PRIVACY_TOPIC = "privacy_request"
PRIVACY_ACTIONS = ("opt_out", "forget")


def parse_privacy_request(text: str, key_for: Callable[[str], str]) -> tuple[str, str]:
    """(action, person_key) from {"action": "opt_out"|"forget", "person_id"|"person_key": ...}.

    A perceived id is hashed at once and never kept or logged.
    """
    doc = load_json(text, PRIVACY_TOPIC)
    if not isinstance(doc, dict):
        raise CoreInputError(f"{PRIVACY_TOPIC}: expected a JSON object")
    refuse_surrogates(doc, PRIVACY_TOPIC, ("action", "person_id", "person_key"))
    action = doc.get("action")
    if action not in PRIVACY_ACTIONS:
        raise CoreInputError(f"{PRIVACY_TOPIC}: action {action!r} is not one of "
                             f"{', '.join(PRIVACY_ACTIONS)}")
    if isinstance(doc.get("person_key"), str):
        key = doc["person_key"].strip().lower()
        if not PERSON_KEY_RE.match(key):
            raise CoreInputError(f"{PRIVACY_TOPIC}: person_key must be 64 hex digits")
    elif isinstance(doc.get("person_id"), str) and doc["person_id"]:
        key = key_for(doc["person_id"])
    else:
        raise CoreInputError(f"{PRIVACY_TOPIC}: give person_id (perceived id) or person_key")
    return action, key


class PrivacyRequests:
    """Live opt-out and forget through the node: a std_msgs/String JSON topic.

    `on_applied(action, key)` lets the node drop what it holds in memory at once.
    """

    def __init__(self, node, store, fleet: Optional[FleetLink] = None,
                 on_applied: Optional[Callable[[str, str], None]] = None,
                 topic: str = PRIVACY_TOPIC) -> None:
        self._node, self._store, self._fleet, self._on_applied = node, store, fleet, on_applied
        self.refused_count = 0        # counted like the node's input topics (diagnostics)
        self.last_refusal = ""
        qos = QoSProfile(depth=50, reliability=ReliabilityPolicy.RELIABLE,
                         durability=DurabilityPolicy.VOLATILE)
        self._sub = node.create_subscription(String, topic, self._on_message, qos)

    def apply(self, text: str) -> tuple[str, str]:
        action, key = parse_privacy_request(text, self._store.key_for)
        if action == "opt_out":
            self._store.opt_out(key)
        elif self._fleet is not None:
            self._fleet.forget(key)
        else:
            self._store.forget(key)
        if self._on_applied is not None:
            self._on_applied(action, key)
        return action, key

    def _on_message(self, msg: String) -> None:
        try:
            action, key = self.apply(msg.data)
        except CoreInputError as exc:
            self.refused_count += 1
            self.last_refusal = str(exc)[:200]
            self._node.get_logger().warning(str(exc), throttle_duration_sec=1.0)
            return
        self._node.get_logger().info(f"{PRIVACY_TOPIC}: {action} applied to {key[:12]}...")


# -- a small stand-alone peer (tests, trying the exchange by hand) ------------------------
def run_peer(argv: list[str] | None = None) -> int:
    """Line protocol on stdin: 'outcome RAW_ID RESULT TIME_S', 'belief RAW_ID', 'quit'.

    Prints 'ready', 'ack EVENT_ID', 'merged EVENT_ID', 'belief A B' (repr floats).
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
    link = FleetLink(node, store, lambda evs: [say(f"merged {e.event_id}") for e in evs],
                     depth=args.depth)
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
                b, _ = store.belief(store.key_for(parts[1]))
                say(f"belief {b.a!r} {b.b!r}")
    finally:
        executor.shutdown(timeout_sec=1.0)
        node.destroy_node()
        rclpy.try_shutdown()
        store.close()
    return 0


if __name__ == "__main__":
    sys.exit(run_peer())
